"""Write docs/api-reference.md from the service's OpenAPI document.

    .venv/bin/python scripts/api_reference.py          # rewrite the file
    .venv/bin/python scripts/api_reference.py --check  # exit 1 if it is out of date

tests/meta/test_api_reference.py runs the check, so the reference stays true.
"""

from __future__ import annotations

import sys
from pathlib import Path

from qualplan.api.app import create_app
from qualplan.config import Settings

OUT = Path(__file__).resolve().parents[1] / "docs" / "api-reference.md"
METHODS = ("get", "post", "put", "patch", "delete")


def _schema_name(ref: dict | None) -> str:
    if not ref:
        return "-"
    if "$ref" in ref:
        return "`" + ref["$ref"].rsplit("/", 1)[-1] + "`"
    if ref.get("type") == "array" and "items" in ref:
        return "list of " + _schema_name(ref["items"])
    return ref.get("type", "-")


def render() -> str:
    spec = create_app(Settings(database_url="sqlite://")).openapi()
    lines = [
        "# API reference (generated)",
        "",
        "Generated from the OpenAPI document of `qualplan.api.app.create_app` by",
        "`scripts/api_reference.py`; do not edit by hand. The same document is served at",
        "`/api/v1/openapi.json`. Authentication, roles and errors: [api.md](api.md).",
        "",
        f"qualplan {spec['info']['version']}, {len(spec['paths'])} paths.",
        "",
        "| method | path | summary | body | answer |",
        "|---|---|---|---|---|",
    ]
    for path in sorted(spec["paths"]):
        for method in METHODS:
            op = spec["paths"][path].get(method)
            if op is None:
                continue
            body = op.get("requestBody", {}).get("content", {})
            body_schema = next(iter(body.values()), {}).get("schema") if body else None
            ok = next((r for code, r in op.get("responses", {}).items()
                       if code.startswith("2")), {})
            answer = next(iter(ok.get("content", {}).values()), {}).get("schema")
            summary = (op.get("description") or op.get("summary") or "").strip()
            summary = summary.splitlines()[0].replace("|", "\\|") if summary else "-"
            lines.append(f"| {method.upper()} | `{path}` | {summary} | "
                         f"{_schema_name(body_schema)} | {_schema_name(answer)} |")
    lines += ["", "## Schemas", ""]
    for name, schema in sorted(spec.get("components", {}).get("schemas", {}).items()):
        props = schema.get("properties", {})
        if not props:
            continue
        fields = ", ".join(f"`{k}`" for k in props)
        lines.append(f"- `{name}`: {fields}")
    return "\n".join(lines) + "\n"


def main(argv: list[str]) -> int:
    text = render()
    if "--check" in argv:
        if not OUT.exists() or OUT.read_text() != text:
            print(f"{OUT} is out of date: run python scripts/api_reference.py")
            return 1
        return 0
    OUT.write_text(text)
    print(f"wrote {OUT}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
