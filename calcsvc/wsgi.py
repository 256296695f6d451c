"""WSGI entry point for gunicorn: ``gunicorn calcsvc.wsgi:app``."""

from calcsvc import create_app

app = create_app()
