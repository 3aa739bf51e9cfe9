"""The service face: one server holds the register and answers desks and other systems
over HTTP — a versioned JSON API with an OpenAPI document, and a web desk page.

Like the CLI it only calls the library below it: handlers parse, call one function of
``issuer.register`` / ``issuer.stocktake`` / ``issuer.labels``, and shape the answer.
Build the ASGI application with :func:`issuer.service.app.create_app`.
"""
