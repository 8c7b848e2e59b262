"""The API definition in OpenAPI 3.0, written from the service's OpenAPI 3.1 document.

FastAPI writes OpenAPI 3.1, whose schemas are JSON Schema 2020-12. Clients that read only
OpenAPI 3.0 (OWSLib's ``api()`` looks for a ``service-desc`` link of type
``application/vnd.oai.openapi+json;version=3.0``) get the same document with each schema
written in 3.0's dialect:

- ``anyOf``/``type`` lists with ``null`` become ``nullable: true``;
- ``examples`` (a list) in a schema becomes ``example`` (its first member);
- ``const`` becomes a one-member ``enum``; numeric ``exclusiveMinimum``/``Maximum``
  become ``minimum``/``maximum`` with the boolean form;
- members 3.0 does not know (``info.summary``, ``license.identifier``, ``webhooks``,
  ``jsonSchemaDialect``) are left out.

``examples`` maps of parameters and media types are the same in both versions.
"""

from __future__ import annotations

import copy
from typing import Any

__all__ = ["OPENAPI_30", "openapi_30"]

#: The version written.
OPENAPI_30 = "3.0.3"
_SUBSCHEMA_LISTS = ("anyOf", "oneOf", "allOf", "prefixItems")
_SUBSCHEMA = ("items", "not", "additionalProperties")


def _schema(node: Any) -> Any:
    """One schema object, rewritten (recursively) in OpenAPI 3.0's dialect."""
    if not isinstance(node, dict):
        return node
    out = {k: v for k, v in node.items()}
    for key in _SUBSCHEMA_LISTS:
        if key in out:
            out[key] = [_schema(s) for s in out[key]]
    for key in _SUBSCHEMA:
        if isinstance(out.get(key), dict):
            out[key] = _schema(out[key])
    if isinstance(out.get("properties"), dict):
        out["properties"] = {k: _schema(v) for k, v in out["properties"].items()}
    types = out.get("type")
    if isinstance(types, list):
        others = [t for t in types if t != "null"]
        if len(others) != len(types):
            out["nullable"] = True
        out["type"] = others[0] if len(others) == 1 else others
        if len(others) > 1:  # several types: one schema per type
            del out["type"]
            out["anyOf"] = [{"type": t} for t in others]
    for key in ("anyOf", "oneOf"):
        if key in out:
            kept = [s for s in out[key] if s != {"type": "null"}]
            if len(kept) != len(out[key]):
                out["nullable"] = True
                if len(kept) == 1 and "$ref" not in kept[0]:
                    del out[key]
                    out = {**kept[0], **out}
                elif len(kept) == 1:
                    del out[key]
                    out["allOf"] = kept
                else:
                    out[key] = kept
    if "examples" in out and isinstance(out["examples"], list):
        examples = out.pop("examples")
        if examples:
            out["example"] = examples[0]
    if "const" in out:
        out["enum"] = [out.pop("const")]
    for bound, plain in (("exclusiveMinimum", "minimum"), ("exclusiveMaximum", "maximum")):
        value = out.get(bound)
        if isinstance(value, int | float) and not isinstance(value, bool):
            out[plain] = value
            out[bound] = True
    return out


def _walk(node: Any) -> Any:
    """Rewrite every ``schema`` member below ``node`` (parameters, media types)."""
    if isinstance(node, dict):
        return {k: (_schema(v) if k == "schema" else _walk(v)) for k, v in node.items()}
    if isinstance(node, list):
        return [_walk(v) for v in node]
    return node


def openapi_30(document: dict[str, Any]) -> dict[str, Any]:
    """The OpenAPI 3.0 form of an OpenAPI 3.1 document (a new object).

    >>> doc = {"openapi": "3.1.0", "info": {"title": "t", "version": "1", "summary": "s"},
    ...        "paths": {}, "components": {"schemas": {"A": {"anyOf": [
    ...            {"type": "string"}, {"type": "null"}], "examples": ["x"]}}}}
    >>> out = openapi_30(doc)
    >>> out["openapi"], out["info"], out["components"]["schemas"]["A"]
    ('3.0.3', {'title': 't', 'version': '1'}, {'type': 'string', 'nullable': True, 'example': 'x'})
    """
    doc = copy.deepcopy(document)
    doc["openapi"] = OPENAPI_30
    for key in ("webhooks", "jsonSchemaDialect"):
        doc.pop(key, None)
    info = doc.get("info", {})
    info.pop("summary", None)
    if isinstance(info.get("license"), dict):
        info["license"].pop("identifier", None)
    doc["paths"] = _walk(doc.get("paths", {}))
    components = doc.get("components", {})
    if "schemas" in components:
        components["schemas"] = {k: _schema(v) for k, v in components["schemas"].items()}
    return doc
