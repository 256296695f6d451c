"""The application layer: resolving parts, running calculations, reviews, searches and batches, and building
the answers. Flask-free: it is called by the HTTP layer, the command line, the page and the benchmarks alike,
and refuses requests by raising the errors of calcsvc.service.errors."""
