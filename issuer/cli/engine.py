"""Engine commands that need no register: schemes, calc, check --scheme, assess.

Each command reads and vets its input, calls one library function and renders the
result; library errors become one line on stderr (see :class:`IssuerGroup`).
"""

from __future__ import annotations

import sys
from typing import TYPE_CHECKING, Annotated, Any

import typer

from issuer.cli.common import (
    CHECK_CAUTION,
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    print_json,
)
from issuer.cli.inputs import FileOption, read_inputs
from issuer.errors import InvalidFormat

commands = command_set()

if TYPE_CHECKING:
    from collections.abc import Callable

    from issuer.checking.schemes.base import Scheme

SchemeOption = Annotated[
    str,
    typer.Option(
        "--scheme",
        "-s",
        help="Check-character method, e.g. luhn, verhoeff, damm.",
        show_default=False,
    ),
]
AlphabetOption = Annotated[
    str | None,
    typer.Option(
        "--alphabet",
        "-a",
        help="Body alphabet: digits, letters, alnum, crockford32, hex or custom:SYMBOLS "
        "(default: the scheme's own).",
        show_default=False,
    ),
]

#: Shapes `issuer schemes` measures on: the longest body up to 6 with at most this
#: many bodies, every code, so the listing stays quick and exact. A method that must
#: verify every altered code itself (several check characters under its own
#: condition) gets the smaller limit.
SCHEMES_MEASURE_LIMIT = 50_000
SCHEMES_MEASURE_LIMIT_VERIFIED = 5_000
_BULK_CALC = 2_000


@commands.command("schemes")
def schemes(as_json: JsonOption = False) -> None:
    """List the check-character schemes, their alphabets and what each measurably
    detects (single substitutions, adjacent transpositions) on a short series."""
    from issuer.checking.assess import assess
    from issuer.checking.errorspace import compares_with_computed
    from issuer.checking.schemes import SCHEMES, get_scheme

    rows = []
    for name in SCHEMES:
        scheme = get_scheme(name)
        size = scheme.alphabet.size
        limit = SCHEMES_MEASURE_LIMIT
        if not compares_with_computed(scheme) and scheme.check_length > 1:
            limit = SCHEMES_MEASURE_LIMIT_VERIFIED
        length = max([n for n in range(2, 7) if size**n <= limit], default=2)
        result = assess(scheme, length, classes=("single", "adjacent"), exhaustive=True)
        rows.append(
            {
                "name": name,
                "title": scheme.title,
                "source": scheme.source,
                "natural_alphabet": scheme.alphabet.name,
                "alphabet_size": size,
                "check_alphabet_size": scheme.check_alphabet.size,
                "check_length": scheme.check_length,
                "measured": {
                    "alphabet": scheme.alphabet.name,
                    "length": length,
                    "exhaustive": True,
                    "single": result.rates["single"],
                    "adjacent": result.rates["adjacent"],
                },
            }
        )
    if as_json:
        print_json(rows)
        return
    from issuer.cli.views import schemes_table

    out = console()
    out.print(schemes_table(rows))
    out.print(f"[dim]{CHECK_CAUTION}[/dim]")


def _labelled(inputs: Any) -> list[tuple[str, str]]:
    if inputs.texts is not None:
        return [(f"argument {i}", text) for i, text in enumerate(inputs.texts, start=1)]
    return [(f"line {i} of {inputs.source}", text) for i, text in enumerate(inputs.lines(), 1)]


def calculate(scheme: Scheme, labelled: list[tuple[str, str]]) -> list[dict[str, str]]:
    """Canonical bodies and their checks; bulk form per length for long lists."""
    bodies = []
    for label, text in labelled:
        try:
            bodies.append(scheme.alphabet.canonical(text))
        except InvalidFormat as exc:
            raise InvalidFormat(f"{label}: {exc.message}") from None
        if not bodies[-1]:
            raise InvalidFormat(f"{label}: nothing but separators")
    checks: list[str] = []
    if len(bodies) < _BULK_CALC:
        checks = [scheme.compute(body) for body in bodies]
    else:
        checks = _bulk_checks(scheme, bodies)
    return [{"body": b, "check": c, "code": b + c} for b, c in zip(bodies, checks)]


def _bulk_checks(scheme: Scheme, bodies: list[str]) -> list[str]:
    import numpy as np

    checks = [""] * len(bodies)
    lengths = np.array([len(b) for b in bodies])
    for width in np.unique(lengths).tolist():
        rows = np.flatnonzero(lengths == width)
        texts = [bodies[i] for i in rows.tolist()]
        values = scheme.alphabet.to_matrix(texts, width).astype(np.int64)
        computed = scheme.check_alphabet.from_matrix(scheme.compute_bulk(values))
        for i, check in zip(rows.tolist(), computed.tolist()):
            checks[i] = check.decode("ascii") if scheme.check_length else ""
    return checks


@commands.command("calc")
def calc(
    bodies: Annotated[
        list[str] | None,
        typer.Argument(help="Bodies to protect ('-' reads standard input).", show_default=False),
    ] = None,
    *,
    scheme: SchemeOption,
    alphabet: AlphabetOption = None,
    file: FileOption = None,
    as_json: JsonOption = False,
) -> None:
    """Append the check character(s) to each BODY and print the full code."""
    from issuer.checking.schemes import get_scheme

    bound = get_scheme(scheme, alphabet)
    rows = calculate(bound, _labelled(read_inputs(bodies, file, what="body")))
    if as_json:
        print_json(rows)
    else:
        sys.stdout.write("".join(row["code"] + "\n" for row in rows))


@commands.command("check")
def check(
    codes: Annotated[
        list[str] | None,
        typer.Argument(help="Codes to verify ('-' reads standard input).", show_default=False),
    ] = None,
    *,
    scheme: Annotated[
        str | None,
        typer.Option(
            "--scheme",
            "-s",
            help="Verify with this check-character method alone, without the register.",
            show_default=False,
        ),
    ] = None,
    alphabet: AlphabetOption = None,
    file: FileOption = None,
    summary: Annotated[
        bool, typer.Option("--summary", help="Print counts instead of one line per code.")
    ] = False,
    as_json: JsonOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
) -> None:
    """Verify codes. With --scheme, by the check character alone; without it, against
    the register (in use, voided, never issued, or a typo of which issued code). Exit 0
    when every code passes (valid; in use, for the register), 1 otherwise."""
    inputs = read_inputs(codes, file)
    if scheme is None:
        if alphabet is not None:
            raise InvalidFormat("--alphabet needs --scheme (the register knows each series' own)")
        from issuer.cli.desk import check_against_register

        code = check_against_register(
            inputs.lines(), db=db, actor=actor, as_json=as_json, summary=summary
        )
        raise typer.Exit(code)
    from issuer.checking.schemes import get_scheme
    from issuer.checking.verify import LinesCheck, check_lines, check_text

    bound = get_scheme(scheme, alphabet)
    if inputs.data is not None:
        result = check_lines(bound, inputs.data, keep_results=not summary)
    else:
        answers = [check_text(bound, text) for text in inputs.texts or []]
        result = LinesCheck(results=answers)
        result.total = len(answers)
        result.valid = sum(a.valid for a in answers)
        result.kinds.update(a.kind for a in answers if a.kind)
    if result.total == 0:
        raise InvalidFormat(f"no codes in {inputs.source}")
    _show_check(bound, result, summary=summary, as_json=as_json)
    raise typer.Exit(0 if result.valid == result.total else 1)


def _show_check(bound: Scheme, result: Any, *, summary: bool, as_json: bool) -> None:
    from issuer.checking.verify import REASONS

    if summary:
        counts = {"scheme": bound.name, "alphabet": bound.alphabet.name, **result.to_dict()}
        if as_json:
            print_json(counts)
            return
        out = console()
        out.print(
            f"{result.total:,} codes checked with {bound.name} over {bound.alphabet.name}: "
            f"{result.valid:,} valid, {result.invalid:,} invalid"
        )
        for key, label in REASONS.items():
            if result.kinds.get(key):
                out.print(f"  {label}: {result.kinds[key]:,}")
        out.print(f"[dim]{CHECK_CAUTION}[/dim]")
        return
    if as_json:
        print_json([answer.to_dict() for answer in result.results])
        return
    sys.stdout.write(
        "".join(
            f"{a.input}  valid\n" if a.valid else f"{a.input}  INVALID: {a.reason}\n"
            for a in result.results
        )
    )


@commands.command("assess")
def assess_command(
    scheme: Annotated[
        list[str],
        typer.Option(
            "--scheme",
            "-s",
            help="Scheme to measure; repeat to compare several side by side.",
            show_default=False,
        ),
    ],
    length: Annotated[
        int,
        typer.Option(
            "--length",
            "-n",
            min=1,
            help="Body length (check characters not counted).",
            show_default=False,
        ),
    ],
    alphabet: AlphabetOption = None,
    expect: Annotated[
        int | None,
        typer.Option(
            "--expect",
            min=1,
            help="Codes the series will issue over its life: adds the sizing table for this "
            "length and the next three.",
            show_default=False,
        ),
    ] = None,
    samples: Annotated[
        int,
        typer.Option(
            "--samples",
            min=1,
            help="Error instances drawn per class when the shape is too big for every code "
            "(sizing draws its own 5,000 per length).",
        ),
    ] = 50_000,
    seed: Annotated[
        int, typer.Option("--seed", help="Seed of the random draws, for repeatable figures.")
    ] = 1969,
    as_json: JsonOption = False,
) -> None:
    """Measure which errors each scheme detects on this series shape, weighted by how
    often people make them; with --expect, how long the codes should be."""
    from issuer.checking.assess import STRUCTURAL_NOTE, assess
    from issuer.checking.neighbours import ERROR_WEIGHTS, ERROR_WEIGHTS_SOURCE
    from issuer.checking.schemes import get_scheme
    from issuer.checking.sizing import size_series
    from issuer.cli.views import LazyProgress

    bound = [get_scheme(name, alphabet) for name in dict.fromkeys(scheme)]
    per_scheme = 2 if expect else 1
    steps = len(bound) * per_scheme
    results, sizings = [], []
    with LazyProgress("measuring") as progress:
        for i, one in enumerate(bound):

            def part(step: int) -> Callable[[float], None]:
                return lambda share: progress((step + share) / steps)

            results.append(
                assess(one, length, samples=samples, seed=seed, progress=part(i * per_scheme))
            )
            if expect:
                sizings.append(
                    size_series(one, length, expect, seed=seed, progress=part(i * per_scheme + 1))
                )
    if as_json:
        objects = []
        for i, result in enumerate(results):
            item = result.to_dict()
            if expect:
                item["sizing"] = [row.to_dict() for row in sizings[i]]
            objects.append(item)
        data: dict[str, Any] = {
            "schemes": objects,
            "weights": dict(ERROR_WEIGHTS),
            "weights_source": ERROR_WEIGHTS_SOURCE,
            "omission_insertion": STRUCTURAL_NOTE,
            "caution": CHECK_CAUTION,
        }
        if expect:
            data["expect"] = expect
            if len(objects) == 1:
                data["sizing"] = objects[0]["sizing"]
        print_json(data)
        return
    from issuer.cli.views import assessment_table, sizing_table

    out = console()
    out.print(assessment_table(results))
    out.print(STRUCTURAL_NOTE[0].upper() + STRUCTURAL_NOTE[1:] + ".")
    for one, rows in zip(bound, sizings):
        out.print(sizing_table(one.name, one.alphabet.name, expect or 0, rows))
    out.print(f"[dim]{CHECK_CAUTION}[/dim]")
