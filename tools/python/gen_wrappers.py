#!/usr/bin/env python3
"""Writes the typed method wrappers of junco_client.py from schema/api/*.json.

    gen_wrappers.py            rewrite the block between the GENERATED markers
    gen_wrappers.py --check    exit 1 when the block differs from the schemas

Run it after adding or changing a method's schema. One wrapper per method:
method "part.fit" becomes Client.part_fit(*, part_id, timeout_s=None); the
params are keyword-only and keep the API's names (SI unit in the name); an
optional param left at None is not sent, so the daemon applies its default.
tests/python/check_wrappers.py checks the result independently (signatures
against the schemas), so the list cannot drift.
"""

import glob
import json
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
TOP = os.path.normpath(os.path.join(HERE, "..", ".."))
MODULE = os.path.join(HERE, "junco_client.py")
BEGIN = "    # ---- BEGIN GENERATED WRAPPERS (tools/python/gen_wrappers.py) ----\n"
END = "    # ---- END GENERATED WRAPPERS ----\n"

PY_TYPE = {"integer": "int", "number": "float", "string": "str", "boolean": "bool", "object": "Dict[str, Any]"}
# The unit a name's suffix stands for (docs/api.md "Units are SI and named in the field").
UNIT_SUFFIX = [("_ohm", "Ω"), ("_hz", "Hz"), ("_db", "dB"), ("_a", "A"), ("_v", "V"), ("_f", "F"), ("_s", "s"), ("_k", "K")]


# Said for params whose schema has no description.
FALLBACK = {
    "job_id": "the job's id (job.submit, job.list)",
    "part_id": "the part's id (part.list)",
    "run_id": "the run's id (job.get runs)",
    "lot": "the lot's name",
    "calculator": "the calculator (docs/design.md): op, bias-r, loss, bias-for-loss, headroom, distortion, "
                  "bias-for-thd, isolation, power, off-headroom, junction-temp, bias-network, series-shunt, "
                  "attenuator",
    "format": "the output format (see docs/api.md)",
}


def py_type(spec):
    t = spec.get("type")
    if isinstance(t, list):
        t = next(x for x in t if x != "null")
    if t == "array":
        item = spec.get("items", {}).get("type")
        if item is None:
            item = "number" if unit_of(spec.get("_name", "")) else "string"
        return f"List[{PY_TYPE[item]}]"
    return PY_TYPE[t]


def unit_of(name):
    for suffix, unit in UNIT_SUFFIX:
        if name.endswith(suffix):
            return unit
    return None


def wrap(text, indent, width=96):
    words, lines, line = text.split(), [], ""
    for w in words:
        if line and len(indent) + len(line) + 1 + len(w) > width:
            lines.append(indent + line)
            line = w
        else:
            line = f"{line} {w}" if line else w
    if line:
        lines.append(indent + line)
    return lines


def load_methods(top=TOP):
    methods = []
    for path in sorted(glob.glob(os.path.join(top, "schema", "api", "*.json"))):
        name = os.path.basename(path)[: -len(".json")]
        if name.startswith("event."):
            continue
        with open(path, encoding="utf-8") as f:
            methods.append((name, json.load(f)))
    return methods


def wrapper(name, schema):
    params = schema.get("params", {})
    props = params.get("properties", {})
    required = params.get("required", [])
    order = [k for k in props if k in required] + [k for k in props if k not in required]
    sig = ["self", "*"] if order else ["self"]
    for k in order:
        spec = dict(props[k], _name=k)
        t = py_type(spec)
        sig.append(f"{k}: {t}" if k in required else f"{k}: Optional[{t}] = None")
    sig.append("timeout_s: Optional[float] = None")
    head = f"    def {name.replace('.', '_')}("
    if len(head) + len(", ".join(sig)) + len(") -> Dict[str, Any]:") <= 110:
        out = [head + ", ".join(sig) + ") -> Dict[str, Any]:"]
    else:
        out = [head] + [f"            {a}," for a in sig[:-1]] + [f"            {sig[-1]}", "    ) -> Dict[str, Any]:"]
    doc = [f"`{name}`: {schema.get('description', '').strip()}", ""]
    if order:
        doc.append("Params:")
        for k in order:
            spec = props[k]
            unit = unit_of(k)
            head = f"{k} ({py_type(dict(spec, _name=k))}{', ' + unit if unit else ''}"
            head += ", required):" if k in required else ", optional):"
            desc = spec.get("description", "").strip()
            if "enum" in spec:
                desc = (desc + "; " if desc else "") + "one of " + ", ".join(spec["enum"])
            desc = desc or FALLBACK.get(k, "")
            doc += wrap(f"{head} {desc}" if desc else head, "    ")
        doc.append("")
    result = schema.get("result", {}).get("properties", {})
    if result:
        doc += wrap("Returns the result object: " + ", ".join(result) + ".", "")
    doc += wrap("Raises RpcError (code and data as in docs/api.md), TimeoutError after timeout_s "
                "(default: the client's), ConnectionError when the connection is lost.", "")
    out.append('        """' + doc[0])
    out += [("        " + d) if d else "" for d in doc[1:]]
    out.append('        """')
    args = ", ".join(f"{k}={k}" for k in order)
    out.append(f"        return self._method({name!r}, timeout_s{', ' + args if args else ''})")
    return "\n".join(out) + "\n"


def generate(top=TOP):
    return BEGIN + "\n".join(wrapper(n, s) for n, s in load_methods(top)) + END


def main():
    with open(MODULE, encoding="utf-8") as f:
        text = f.read()
    start, stop = text.index(BEGIN), text.index(END) + len(END)
    new = text[:start] + generate() + text[stop:]
    if "--check" in sys.argv[1:]:
        if new != text:
            print("gen_wrappers: junco_client.py's wrappers differ from schema/api; run tools/python/gen_wrappers.py",
                  file=sys.stderr)
            return 1
        return 0
    with open(MODULE, "w", encoding="utf-8") as f:
        f.write(new)
    return 0


if __name__ == "__main__":
    sys.exit(main())
