"""Settings: built-in defaults < config file < environment < command line.

The documented defaults ship inside the package (``issuer/bundled_config/issuer.toml``,
from the repository's ``config/``). A user's own file is ``issuer.toml`` in the user
config directory (``platformdirs.user_config_dir("issuer")``), or the file named by
``ISSUER_CONFIG``. Environment: ``ISSUER_DB``, ``ISSUER_ACTOR``, ``ISSUER_KEY_FILE``.
"""

from __future__ import annotations

import getpass
import os
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

from issuer import limits
from issuer.errors import InvalidFormat

APP_NAME = "issuer"


def bundled_config_text() -> str:
    return resources.files("issuer.bundled_config").joinpath("issuer.toml").read_text("utf-8")


def user_config_path() -> Path:
    explicit = os.environ.get("ISSUER_CONFIG")
    if explicit:
        return Path(explicit)
    from platformdirs import user_config_dir

    return Path(user_config_dir(APP_NAME)) / "issuer.toml"


def default_database_path() -> Path:
    from platformdirs import user_data_dir

    return Path(user_data_dir(APP_NAME)) / "register.sqlite"


def _merge(base: dict[str, Any], over: dict[str, Any]) -> dict[str, Any]:
    merged = dict(base)
    for key, value in over.items():
        if isinstance(value, dict) and isinstance(merged.get(key), dict):
            merged[key] = _merge(merged[key], value)
        else:
            merged[key] = value
    return merged


def _read_toml(text: str, where: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InvalidFormat(f"config file {where} is not valid TOML: {exc}") from None


@dataclass(frozen=True)
class Settings:
    """The settings in force for one invocation."""

    database: str
    actor: str
    raw: dict[str, Any] = field(default_factory=dict)
    source: Path | None = None  # the user's config file, when one was read
    #: the file the register's scatter keys are sealed under (None: the default place)
    key_file: str | None = None

    @property
    def folder(self) -> Path | None:
        """The user's config file's folder: relative paths in it (logos, fonts) start there."""
        return None if self.source is None else self.source.parent

    def signing_key(self) -> Path | None:
        """The log's Ed25519 signing key (``[register] signing_key``; relative to the config
        file's folder), or None when the config names none."""
        value = self.section("register").get("signing_key")
        if not value:
            return None
        path = Path(value).expanduser()
        return path if path.is_absolute() or self.folder is None else self.folder / path

    def section(self, name: str) -> dict[str, Any]:
        value = self.raw.get(name, {})
        return value if isinstance(value, dict) else {}


def load_settings(*, database: str | None = None, actor: str | None = None) -> Settings:
    """Resolve settings; arguments are the command line's values (``None`` = not given)."""
    raw = _read_toml(bundled_config_text(), "(built-in)")
    path = user_config_path()
    source = None
    if path.is_file():
        raw = _merge(raw, _read_toml(_read_text(path), str(path)))
        source = path.resolve()
    _check_types(raw, str(path))
    register = raw.get("register", {})
    chosen_db = (
        database
        or os.environ.get("ISSUER_DB")
        or register.get("database")
        or str(default_database_path())
    )
    chosen_actor = actor or os.environ.get("ISSUER_ACTOR") or register.get("actor") or _os_user()
    key_file = os.environ.get("ISSUER_KEY_FILE") or register.get("key_file") or None
    if key_file is not None and source is not None and not Path(key_file).expanduser().is_absolute():
        key_file = str(source.parent / Path(key_file).expanduser())  # relative to the config file
    return Settings(database=str(chosen_db), actor=str(chosen_actor), raw=raw, source=source, key_file=key_file)


def _read_text(path: Path) -> str:
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InvalidFormat(f"cannot read the config file {path}: {exc.strerror or exc}") from None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InvalidFormat(f"config file {path} is not UTF-8 text (byte {exc.start + 1}); save it as UTF-8") from None


#: what each known setting must be: a table, or in ``[register]`` a text or a whole number
_TABLES = ("register", "layouts", "labels")
_REGISTER_TYPES: dict[str, type] = {
    "database": str, "actor": str, "busy_timeout_ms": int, "signing_key": str, "key_file": str,
}
#: the longest wait for a busy register a config may ask for, in milliseconds
MAX_BUSY_TIMEOUT_MS = 600_000


def _check_types(raw: dict[str, Any], where: str) -> None:
    """One clear line for a setting of the wrong type, instead of a failure later."""
    for name in _TABLES:
        if name in raw and not isinstance(raw[name], dict):
            raise InvalidFormat(f"config file {where}: [{name}] must be a table, not {type(raw[name]).__name__}")
    register = raw.get("register", {})
    for name, kind in _REGISTER_TYPES.items():
        value = register.get(name)
        if value is None:
            continue
        if not isinstance(value, kind) or isinstance(value, bool):
            raise InvalidFormat(
                f"config file {where}: register.{name} must be {'text' if kind is str else 'a whole number'}, "
                f"not {type(value).__name__}"
            )
    timeout = register.get("busy_timeout_ms")
    if timeout is not None and not 0 <= timeout <= MAX_BUSY_TIMEOUT_MS:
        raise InvalidFormat(f"config file {where}: register.busy_timeout_ms must be 0 to {MAX_BUSY_TIMEOUT_MS:,}")
    if register.get("actor") is not None:
        limits.text("actor", register["actor"], label=f"config file {where}: register.actor")
    for name in ("database", "signing_key", "key_file"):
        if register.get(name) is not None:
            limits.file_name(f"config file {where}: register.{name}", register[name])


def _os_user() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "unknown"
