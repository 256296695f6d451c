"""Liveness and readiness probes for load balancers and container health checks."""

from __future__ import annotations

from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import Schema, fields

from calcsvc.web.auth import database
from calcsvc.web.problems import RETRY_AFTER_HEADER, database_problem, error_response

blp = Blueprint("health", __name__, description="Process and database health")


class HealthSchema(Schema):
    status = fields.String(required=True)


@blp.route("/healthz")
class Liveness(MethodView):
    @blp.response(200, HealthSchema)
    def get(self) -> dict[str, str]:
        """The process is up and answering."""
        return {"status": "ok"}


@blp.route("/readyz")
class Readiness(MethodView):
    @blp.response(200, HealthSchema)
    @error_response(blp, 503, "the database is unreachable", RETRY_AFTER_HEADER)
    def get(self) -> dict[str, str]:
        """The database answers; 503 otherwise."""
        if not database().reachable():
            raise database_problem(busy=False)
        return {"status": "ready"}
