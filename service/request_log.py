"""Placeholder; its owner replaces it."""


def init_app(app):
    return None
