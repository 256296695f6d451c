"""The thin HTTP layer: Flask app, flask-smorest blueprints, marshmallow schemas."""
