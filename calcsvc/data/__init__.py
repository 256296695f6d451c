"""Parts and token storage (SQLAlchemy 2). Imports the core's nothing and the web layer's nothing."""
