"""gunicorn settings for uvdose in the container:
``gunicorn -c deploy/gunicorn.conf.py 'uvdose.service.app:create_app()'``.

The settings and hooks are those of ``uvdose serve``, defined once in the package
(``uvdose.service.server``, whose docstring explains the worker and thread model, the
settings, metrics, logs and shutdown), so the image and an installed ``uvdose serve`` run
the same way.
"""
from uvdose.service import server as _server

_server.pin_numeric_threads()  # before the app, and numpy, is imported
_server.metrics_directory()
globals().update(_server.gunicorn_settings())
globals().update(_server.HOOKS)
