#!/usr/bin/env python3
"""Checks tools/python/junco_client.py against schema/api/*.json and CMakeLists.txt:

- every method with a schema has exactly one typed wrapper (method "a.b" ->
  Client.a_b), and no wrapper exists for a method without a schema;
- a wrapper's params are keyword-only, named as the schema's properties (SI
  unit in the name), required ones without a default, optional ones
  defaulting to None, then timeout_s; annotations match the schema types;
- each docstring names its method and every param;
- the generated block is what tools/python/gen_wrappers.py makes today;
- junco_client.__version__ equals CMakeLists.txt project(VERSION ...), and
  pyproject.toml takes its version from there.

    check_wrappers.py SOURCE_DIR      exit 0 when all hold; else each problem on stderr, exit 1

Run by tests/integration/python_client_test.cpp. Reads the module from the
source tree, not an installed copy. The checks are introspection, written
independently of the generator, so a generator bug does not hide itself.
"""

import glob
import inspect
import json
import os
import re
import subprocess
import sys
import typing

SCHEMA_TYPES = {"integer": int, "number": float, "string": str, "boolean": bool, "object": dict, "array": list}


def base_type(hint):
    """int for int / Optional[int]; list for List[float]; dict for Dict[str, Any]."""
    args = [a for a in typing.get_args(hint) if a is not type(None)]
    if typing.get_origin(hint) is typing.Union and len(args) == 1:
        hint = args[0]
    return typing.get_origin(hint) or hint


def main():
    top = os.path.abspath(sys.argv[1] if len(sys.argv) > 1 else os.path.join(os.path.dirname(__file__), "..", ".."))
    sys.path.insert(0, os.path.join(top, "tools", "python"))
    import junco_client  # noqa: E402

    problems = []
    schemas = {}
    for path in sorted(glob.glob(os.path.join(top, "schema", "api", "*.json"))):
        name = os.path.basename(path)[: -len(".json")]
        if not name.startswith("event."):
            with open(path, encoding="utf-8") as f:
                schemas[name] = json.load(f)
    if len(schemas) < 10:
        problems.append(f"only {len(schemas)} method schemas found under {top}/schema/api")

    wrapped = {}
    for attr, fn in inspect.getmembers(junco_client.Client, inspect.isfunction):
        m = re.match(r"`([a-z]+\.[a-z_.]+)`", inspect.getdoc(fn) or "")
        if m:
            wrapped[m.group(1)] = (attr, fn)
    for name in sorted(set(wrapped) - set(schemas)):
        problems.append(f"Client.{wrapped[name][0]} wraps {name}, which has no schema in schema/api")

    for name, schema in schemas.items():
        attr = name.replace(".", "_")
        fn = getattr(junco_client.Client, attr, None)
        if fn is None or name not in wrapped or wrapped[name][0] != attr:
            problems.append(f"{name}: no wrapper Client.{attr} whose docstring starts with `{name}`")
            continue
        params = schema.get("params", {})
        props = params.get("properties", {})
        required = set(params.get("required", []))
        sig = inspect.signature(fn)
        hints = typing.get_type_hints(fn)
        args = list(sig.parameters.values())[1:]  # after self
        if not args or args[-1].name != "timeout_s" or args[-1].default is not None:
            problems.append(f"{name}: the last param must be timeout_s=None")
        else:
            args = args[:-1]
        names = [a.name for a in args]
        if sorted(names) != sorted(props):
            problems.append(f"{name}: wrapper params {names} != schema params {sorted(props)}")
        doc = inspect.getdoc(fn)
        for a in args:
            if a.name not in props:
                continue
            if a.kind is not inspect.Parameter.KEYWORD_ONLY:
                problems.append(f"{name}: param {a.name} is not keyword-only")
            if a.name in required and a.default is not inspect.Parameter.empty:
                problems.append(f"{name}: required param {a.name} has a default")
            if a.name not in required and a.default is not None:
                problems.append(f"{name}: optional param {a.name} must default to None (not sent)")
            t = props[a.name].get("type")
            t = next(x for x in t if x != "null") if isinstance(t, list) else t
            if base_type(hints.get(a.name)) is not SCHEMA_TYPES[t]:
                problems.append(f"{name}: param {a.name} annotated {hints.get(a.name)}, schema type {t}")
            if not re.search(rf"^\s*{a.name} \(", doc, re.M):
                problems.append(f"{name}: the docstring does not describe param {a.name}")

    gen = subprocess.run([sys.executable, os.path.join(top, "tools", "python", "gen_wrappers.py"), "--check"],
                         capture_output=True, text=True)
    if gen.returncode != 0:
        problems.append("gen_wrappers.py --check: " + (gen.stderr.strip() or f"exit {gen.returncode}"))

    with open(os.path.join(top, "CMakeLists.txt"), encoding="utf-8") as f:
        m = re.search(r"project\(\s*junco\b[^)]*?\bVERSION\s+([0-9][0-9.]*)", f.read())
    if not m:
        problems.append("CMakeLists.txt: no project(junco VERSION x.y.z)")
    elif m.group(1) != junco_client.__version__:
        problems.append(f"junco_client.__version__ {junco_client.__version__} != CMake project version {m.group(1)} "
                        "(change tools/python/junco_client.py with CMakeLists.txt)")
    with open(os.path.join(top, "tools", "python", "pyproject.toml"), encoding="utf-8") as f:
        if 'version = {attr = "junco_client.__version__"}' not in f.read():
            problems.append("tools/python/pyproject.toml does not take its version from junco_client.__version__")

    for p in problems:
        print("check_wrappers: " + p, file=sys.stderr)
    if problems:
        return 1
    print(f"check_wrappers: {len(schemas)} methods, {len(wrapped)} wrappers, version {junco_client.__version__}: ok")
    return 0


if __name__ == "__main__":
    sys.exit(main())
