"""One module per page; each has ``layout(ctx, **query)`` and ``register(app, ctx)``."""
