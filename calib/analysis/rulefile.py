"""The certified rule per class as a small file for pipelines: k = f m and k = a + C ln n.

``calib tables STORE --rule FILE`` writes, per class (family with its non-size parameters,
projector, retrieval) and tolerance of the table, the rule that gives a k for a model of any size,
where it comes from, the scope and confidence it holds at, and the ranges of size and structure it
was measured on. :func:`calib.atlas.rule_k` reads the file and answers a new model in one call.
The format is ``calib.k-rule`` version 1, JSON Schema ``calib/schemas/k-rule.v1.json``; like a
table, the file carries a checksum of its content and is refused when edited.

Where a class's rule comes from (``basis``):

- ``swept rule``: the spec swept k by the rule (``k = {fractions}`` or ``k = {log_multiples}``), and
  the rule of :mod:`calib.analysis.classrule` certified the value: for the class (scope ``class``,
  units as clusters) when it can, else for the units measured (scope ``instances``: every unit,
  Bonferroni). A fraction gives k = f m (the ``log_rule`` is null: not swept), a multiple k = C ln n
  (a = 0).
- ``measured sizes``: any other grid. Each measured size has a safe k (the class scope when every
  size has one, else the instances scope when every size has one, else no rule, with the first
  size that has none). The rule is the envelope of those safe k: f = max_i k_i / m_i, and, with C the
  fitted law's slope over the sizes of that scope (:mod:`calib.analysis.law`),
  a = max_i (k_i - C ln n_i), both rounded up at 4 significant digits. So at every measured size
  each rule gives at least the size's safe k, above which every swept k met the target (the
  monotone rule); between and beyond the measured sizes they rest on that monotone rule and on the
  law, which is why the file states the ranges (n, m and the features of
  :mod:`calib.analysis.fitcheck`) that a new model is checked against.

The answer for a model takes the larger of the two rules' k (each rounded up), never above m.
These are empirical statements on the instances measured, not proofs.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Optional

from calib import __version__
from calib.analysis.fitcheck import measured_ranges
from calib.analysis.tablefile import checksum, dumps, read_json, schema_error, seal
from calib.errors import InputError

FORMAT = "calib.k-rule"
VERSION = 1
SCHEMA_FILE = "k-rule.v1.json"
NOTICE = ("A k rule is empirical evidence on the instances measured, not a proof: check it on your own models "
          "(`calib probe FILE --find-k`) before relying on it.")


def round_up(value: float, digits: int = 4) -> float:
    """``value`` rounded up at ``digits`` significant digits.

    >>> round_up(0.123412), round_up(12.0), round_up(-3.14159)
    (0.1235, 12.0, -3.141)
    """
    if value == 0:
        return 0.0
    step = 10.0 ** (math.floor(math.log10(abs(value))) - digits + 1)
    return float(f"{math.ceil(value / step - 1e-9) * step:.{digits}g}")


def _key(item: dict) -> tuple:
    return (item["family"], json.dumps(item["class_params"], sort_keys=True), item["projector"], item["retrieval"])


def _swept(law: dict, entries: list[dict]) -> Optional[dict]:
    """The rule of a swept grid (module text), or None when the law has none."""
    if not law.get("rules"):
        return None
    rule = law["rules"][0]
    scope = "class" if rule["class"]["value"] is not None else ("instances" if rule["instances"]["value"] is not None else None)
    value = None if scope is None else rule[scope]["value"]
    block = {"scope": scope, "unit": rule["unit"], "basis": "swept rule",
             "statement": rule[scope]["statement"] if scope else rule["instances"]["statement"],
             "reason": "" if scope else rule["class"]["reason"] or rule["instances"]["reason"]}
    fraction = {"f": value if rule["coefficient"] == "f" else None}
    log = {"a": 0.0 if rule["coefficient"] == "C" and value is not None else None,
           "C": value if rule["coefficient"] == "C" else None}
    return block | {"fraction_rule": fraction, "log_rule": log}


def _envelope(law: dict, entries: list[dict]) -> dict:
    """The envelope of the measured sizes' safe k (module text)."""
    scopes = (("class", [entry["class"]["safe_k"] for entry in entries], "class_safe_k_law"),
              ("instances", [entry["safe_k"] for entry in entries], "safe_k_law"))
    chosen = next(((scope, ks, name) for scope, ks, name in scopes if all(k is not None for k in ks)), None)
    empty = {"fraction_rule": {"f": None}, "log_rule": {"a": None, "C": None}, "unit": "instance",
             "basis": "measured sizes", "statement": ""}
    if chosen is None:
        first = next(entry for entry in entries if entry["safe_k"] is None)
        return empty | {"scope": None, "reason": f"{first['size']} has no safe k ({first['safe_k_reason']})"}
    scope, ks, name = chosen
    f = round_up(max(k / entry["projected_dim"] for k, entry in zip(ks, entries)))
    slope = law[name]["C"]
    log, why = {"a": None, "C": None}, ""
    if slope is None or slope <= 0:
        why = f"no k = a + C ln n: {law[name]['reason'] or 'the fitted C is not positive'}"
    else:
        log = {"a": round_up(max(k - slope * math.log(entry["n_points"]) for k, entry in zip(ks, entries))), "C": slope}
    sizes = f"n in [{entries[0]['n_points']}, {entries[-1]['n_points']}]"
    statement = (f"k = ceil(f m) with f = {f:g}" + (f" and k = ceil(a + C ln n) with a = {log['a']:g}, C = {log['C']:g}"
                 if log["C"] else "") + f" give at least the {scope} safe k at each measured size ({sizes})")
    return empty | {"scope": scope, "reason": why, "statement": statement, "fraction_rule": {"f": f}, "log_rule": log}


def class_rules(table: dict) -> list[dict]:
    """One rule per class and tolerance of ``table`` (module text), in table order."""
    out = []
    for analysis in table["analyses"]:
        by_class: dict = {}
        for entry in analysis["entries"]:
            by_class.setdefault(_key(entry), []).append(entry)
        for law in analysis["laws"]:
            entries = sorted(by_class.get(_key(law), []), key=lambda entry: entry["n_points"])
            if not entries:
                continue
            rule = _swept(law, entries) or _envelope(law, entries)
            out.append({key: law[key] for key in ("family", "class_params", "projector", "retrieval", "kind")} | {
                "tau": analysis["tau"], "predicate": analysis["predicate"]["name"], **rule,
                "sizes": [{"size": entry["size"], "n": entry["n_points"], "m": entry["projected_dim"],
                           "safe_k": entry["class"]["safe_k"] if rule["scope"] == "class" else entry["safe_k"]}
                          for entry in entries],
                "n_range": [entries[0]["n_points"], entries[-1]["n_points"]],
                "m_range": [min(entry["projected_dim"] for entry in entries), max(entry["projected_dim"] for entry in entries)],
                "feature_ranges": measured_ranges([entry.get("features") for entry in entries])})
    return out


def rule_document(table: dict) -> dict:
    """The rule file of a table: its classes' rules, the target, the source table's checksum; sealed."""
    target = table["target"]
    return seal({"format": FORMAT, "format_version": VERSION, "code_version": __version__,
                 "campaign": table["campaign"], "source_checksum": table["checksum"],
                 "target": {"success_rate": target["success_rate"], "confidence": target["confidence"]},
                 "notice": NOTICE, "classes": class_rules(table)})


def write_rules(table: dict, path: Path) -> None:
    """Write the rule file of ``table`` to ``path`` (stable bytes: equal tables, equal files)."""
    Path(path).write_text(dumps(rule_document(table)), encoding="utf-8")


def read_rules(path) -> dict:
    """Read, version-check, schema-validate and checksum-verify a rule file."""
    where, fix = str(path), "re-create it with `calib tables STORE --rule FILE`"
    document = read_json(path, "rule", "--rule")
    if not isinstance(document, dict) or document.get("format") != FORMAT or document.get("format_version") != VERSION:
        raise InputError(where, f"is not a {FORMAT} file of version {VERSION}", fix)
    error = schema_error(document, SCHEMA_FILE)
    if error:
        raise InputError(where, f"does not match the k-rule schema v{VERSION} {error}", fix)
    if document["checksum"] != checksum(document):
        raise InputError(where, "checksum mismatch: the file was changed after calib wrote it", fix)
    return document


def rule_k(rule: dict, n: int, m: int) -> dict:
    """The k of one class's rule for a model with point count ``n`` and projected dimension ``m``."""
    f, a, C = rule["fraction_rule"]["f"], rule["log_rule"]["a"], rule["log_rule"]["C"]
    by_fraction = None if f is None else max(1, math.ceil(f * m - 1e-9))
    by_log = None if C is None else max(1, math.ceil(a + C * math.log(n) - 1e-9))
    given = [k for k in (by_fraction, by_log) if k is not None]
    k = max(given) if given else None
    low, high = rule["n_range"]
    return {"k": None if k is None or k > m else k, "k_fraction_rule": by_fraction, "k_log_rule": by_log,
            "no_reduction": k is not None and k >= m, "extrapolated": not low <= n <= high}
