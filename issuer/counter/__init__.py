"""The counter screen: a clerk's whole day in one keyboard-driven terminal screen
(Textual). Like every face it only calls the library: :mod:`issuer.counter.desk` holds
the calls, :mod:`issuer.counter.shell` the screen and :mod:`issuer.counter.app` its acts."""
