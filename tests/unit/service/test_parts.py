"""Part writes checked below the HTTP layer: the create schema and unit conversion the file import uses too."""

from __future__ import annotations

import pytest

from calcsvc.service.errors import InvalidInput
from calcsvc.service.parts import PartCreateSchema, convert_parameters


def test_parameters_with_units_are_converted_to_si() -> None:
    converted = convert_parameters("led", {"vf_typ_v": "2.1 V", "if_max_a": "20 mA", "color": "amber"})
    assert converted == {"vf_typ_v": 2.1, "if_max_a": pytest.approx(0.02), "color": "amber"}


def test_a_wrong_dimension_or_a_huge_integer_names_the_parameter() -> None:
    with pytest.raises(InvalidInput) as refused:
        convert_parameters("led", {"vf_typ_v": "2 A", "if_max_a": 10**400})
    assert set(refused.value.errors or {}) == {"parameters.vf_typ_v", "parameters.if_max_a"}
    assert refused.value.slug == "validation"


def test_the_create_schema_refuses_bad_ids_kinds_and_values() -> None:
    errors = PartCreateSchema().validate(
        {"part_id": "Bad Id", "kind": "flux-capacitor", "parameters": {"vf_typ_v": True}, "description": "a\x00b"}
    )
    assert set(errors) == {"part_id", "kind", "parameters", "description"}
    good = {"part_id": "led-amber-3mm", "kind": "led", "parameters": {"vf_typ_v": "2.1 V"}}
    assert PartCreateSchema().validate(good) == {}
