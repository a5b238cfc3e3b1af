"""HTTP process: the ASGI app, its middleware and routes, and the pool that hands jobs to the workers.

Never imports the worker side; it receives the worker entry point from
:func:`service.app.create_app` and shares only :mod:`service.contract` with it.
"""
