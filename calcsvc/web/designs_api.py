"""``/v1/designs``: saved designs, their revisions, re-review and watch list; ``/v1/parts/<id>/impact``: what a
part revision would do to them. The use cases are calcsvc.service.designs, .impact and .watch."""

from __future__ import annotations

from typing import Any

from flask import g, request, url_for
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE

from calcsvc.data import part_ids
from calcsvc.data.design_store import DesignStore, DesignView
from calcsvc.service.designs import DesignDraft, rereview, save
from calcsvc.service.impact import part_impact
from calcsvc.service.watch import watch_list
from calcsvc.web.auth import database, reads, requires
from calcsvc.web.designs_schemas import (
    DesignCreateSchema,
    DesignListSchema,
    DesignQuerySchema,
    DesignRevisionsSchema,
    DesignWriteSchema,
    ImpactSchema,
    RereviewQuerySchema,
    RereviewSchema,
    SavedDesignSchema,
    read_request,
)
from calcsvc.web.problems import Problem, error_response
from calcsvc.web.revisioned import IfMatchSchema, expected_revision, storable_revision

blp = Blueprint("designs", __name__, url_prefix="/v1/designs", description="Saved designs and their re-review")
impact_blp = Blueprint("impact", __name__, url_prefix="/v1/parts", description="What a part edit does to designs")
_ETAG_HEADER = {"ETag": {"schema": {"type": "string"}}}


def _no_such_shape(name: str) -> None:
    value = (request.view_args or {}).get(name)
    if value is not None and not part_ids.is_part_id(value):
        message = f"no {name.removesuffix('_id')} {value[:80]!r}: the id is not of a valid shape"
        raise Problem(404, message, "not-found", {name: [message]})


blp.before_request(lambda: _no_such_shape("design_id"))
impact_blp.before_request(lambda: _no_such_shape("part_id"))


def design_data(view: DesignView, extra: dict[str, Any] | None = None) -> dict[str, Any]:
    content = view.content
    return {
        "design_id": view.design_id,
        "revision": view.revision,
        "status": view.status,
        "calculation": content.calculation,
        "owner": content.owner,
        "description": content.description,
        "body": content.body,
        "inputs": content.inputs,
        "parts": content.parts,
        "review": content.review,
        "author": view.author,
        "created_at": view.created_at,
        **(extra or {}),
    }


def _draft(design_id: str, body: dict[str, Any]) -> DesignDraft:
    inputs = read_request(body["calculation"], body["request"])
    owner = body["owner"] or g.identity.name
    return DesignDraft(design_id, body["calculation"], owner, body["description"], body["request"], inputs)


@blp.route("")
class Designs(MethodView):
    @reads
    @blp.arguments(DesignQuerySchema, location="query", unknown=RAISE)  # a misspelt filter is refused
    @blp.response(200, DesignListSchema)
    def get(self, query: dict[str, Any]) -> dict[str, Any]:
        """List saved designs in pages; the watch-list filters keep those failing at today's approved parts
        and those a pending part draft would change (each with what was found)."""
        found, total = watch_list(
            database(),
            query.get("status"),
            query["fails_at_current"],
            query["affected_by_draft"],
            query["offset"],
            query["limit"],
        )
        items = [design_data(view, extra) for view, extra in found]
        return {"items": items, "total": total, "offset": query["offset"], "limit": query["limit"]}

    @requires("editor")
    @blp.arguments(DesignCreateSchema)
    @blp.response(201, SavedDesignSchema, headers={**_ETAG_HEADER, "Location": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not save designs")
    @error_response(blp, 404, "a referenced part does not exist")
    @error_response(blp, 409, "a design with this id exists")
    def post(self, body: dict[str, Any]) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Save a design (editor): its request is reviewed now and stored with the part revisions it used."""
        view = save(database(), _draft(body["design_id"], body), g.identity.name)
        location = url_for("designs.Design", design_id=view.design_id)
        return design_data(view), 201, {"ETag": view.etag, "Location": location}


@blp.route("/<string:design_id>")
class Design(MethodView):
    @reads
    @blp.response(200, SavedDesignSchema, headers=_ETAG_HEADER)
    @error_response(blp, 404, "no such design")
    def get(self, design_id: str) -> tuple[dict[str, Any], int, dict[str, str]]:
        """One design at its current revision, with its review at the revisions it used, and its ETag."""
        with database().transaction() as session:
            view = DesignStore(session).get(design_id)
        return design_data(view), 200, {"ETag": view.etag}

    @requires("editor")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.arguments(DesignWriteSchema)
    @blp.response(200, SavedDesignSchema, headers=_ETAG_HEADER)
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not revise designs")
    @error_response(blp, 404, "no such design, or a referenced part does not exist")
    @error_response(blp, 409, "the design is retired")
    @error_response(blp, 412, "the design changed since the ETag was read")
    @error_response(blp, 428, "If-Match is missing")
    def put(
        self, _headers: dict[str, Any], body: dict[str, Any], design_id: str
    ) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Store a new revision of the design (editor; If-Match), reviewed now at the parts it names."""
        expected = expected_revision(design_id)
        view = save(database(), _draft(design_id, body), g.identity.name, expected)
        return design_data(view), 200, {"ETag": view.etag}

    @requires("editor")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.response(200, SavedDesignSchema, headers=_ETAG_HEADER)
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not retire designs")
    @error_response(blp, 404, "no such design")
    @error_response(blp, 412, "the design changed since the ETag was read")
    @error_response(blp, 428, "If-Match is missing")
    @error_response(blp, 415, "a body was sent, and not as JSON (retiring takes none)")
    def delete(self, _headers: dict[str, Any], design_id: str) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Retire the design (editor; If-Match): off the watch list and the impact lists, its revisions kept."""
        expected = expected_revision(design_id)
        with database().transaction() as session:
            view = DesignStore(session).retire(design_id, expected, g.identity.name)
        return design_data(view), 200, {"ETag": view.etag}


@blp.route("/<string:design_id>/revisions")
class DesignRevisions(MethodView):
    @reads
    @blp.response(200, DesignRevisionsSchema)
    @error_response(blp, 404, "no such design")
    def get(self, design_id: str) -> dict[str, Any]:
        """Every revision of a design, oldest first."""
        with database().transaction() as session:
            views = DesignStore(session).revisions(design_id)
        return {"design_id": design_id, "revisions": [design_data(view) for view in views]}


@blp.route("/<string:design_id>/review")
class DesignReview(MethodView):
    @reads
    @blp.arguments(RereviewQuerySchema, location="query", unknown=RAISE)
    @blp.response(200, RereviewSchema)
    @error_response(blp, 404, "no such design or revision")
    def get(self, query: dict[str, Any], design_id: str) -> dict[str, Any]:
        """Re-run the design at its pinned part revisions (the same fingerprint and verdict as when saved) and
        at the parts' current approved revisions, side by side, with what differs."""
        return rereview(database(), design_id, query.get("revision"))


@impact_blp.route("/<string:part_id>/impact")
class PartImpact(MethodView):
    @reads
    @impact_blp.response(200, ImpactSchema)
    @error_response(impact_blp, 404, "no such part")
    def get(self, part_id: str) -> dict[str, Any]:
        """What approving the part's current revision (a draft) would do to every saved design that uses it."""
        return part_impact(database(), part_id)


@impact_blp.route("/<string:part_id>/revisions/<int:revision>/impact")
class RevisionImpact(MethodView):
    @reads
    @impact_blp.response(200, ImpactSchema)
    @error_response(impact_blp, 404, "no such part or revision")
    def get(self, part_id: str, revision: int) -> dict[str, Any]:
        """What putting this revision of the part in place would do to every saved design that uses it."""
        return part_impact(database(), part_id, storable_revision(part_id, revision))
