"""The counter screen: a clerk's whole day in one keyboard-driven terminal screen
(Textual). Like every face it only calls the library: :mod:`issuer.counter.desk` holds
the calls, :mod:`issuer.counter.app` the screen."""
