"""The uvdose app behind the strictest Content-Security-Policy its HTML page should need.

Used by test_docs_browser.py: the page, its script, its forms and its pictures must work
with nothing allowed but the service itself (this policy replaces any the service sets).
"""
from uvdose.service.app import create_app as create_service_app

STRICT_POLICY = ("default-src 'self'; img-src 'self'; style-src 'self'; script-src 'self'; "
                 "form-action 'self'; base-uri 'none'; frame-ancestors 'none'; object-src 'none'")


def create_app():
    app = create_service_app()

    @app.after_request
    def _policy(response):
        response.headers["Content-Security-Policy"] = STRICT_POLICY
        return response

    return app
