"""Contracts: schemas match the models, every rule is explained and sourced, the public API
is complete, and the core never imports the command line."""

from __future__ import annotations

import ast

import pytest

import chargeplan
from chargeplan.engine import rules as _registered  # noqa: F401
from chargeplan.engine.registry import RULES, Phase, Rule, RuleSet
from chargeplan.schema import schema_texts

from .conftest import REPO


@pytest.mark.parametrize("name", sorted(schema_texts()))
def test_committed_schema_matches_the_models(name):
    committed = (REPO / "schemas" / name).read_text(encoding="utf-8")
    assert committed == schema_texts()[name], (
        f"schemas/{name} is stale: run 'chargeplan schema --out schemas --force'"
    )


def test_every_rule_has_statement_detail_and_source():
    manifest = RULES.manifest()
    assert len(manifest) >= 20
    for entry in manifest:
        assert entry["statement"] and entry["source"], entry["id"]
        assert entry["statement"][0].isupper() and len(entry["statement"]) < 160


def test_rules_run_in_phase_order():
    phases = [r.phase for r in RULES]
    assert phases == sorted(phases)
    assert {Phase.DERIVE, Phase.SET, Phase.COMPENSATE, Phase.FIT, Phase.EXCLUDE,
            Phase.INTERLOCK} <= set(phases)


def test_registry_refuses_duplicates_and_bad_ids():
    registry = RuleSet()
    first = next(iter(RULES))
    registry.register(first)
    with pytest.raises(ValueError, match="duplicate rule id"):
        registry.register(first)
    with pytest.raises(ValueError, match="CP and three digits"):
        registry.register(Rule("X1", "a.b", Phase.DERIVE, "s", "", "src", first.apply))
    with pytest.raises(ValueError, match="its phase"):
        registry.register(Rule("CP299", "x.y", Phase.DERIVE, "s", "", "src", first.apply))


def test_public_api_is_complete():
    for name in chargeplan.__all__:
        assert getattr(chargeplan, name) is not None, name
    assert "plan_file" in chargeplan.__all__ and "verify" in chargeplan.__all__


def test_core_never_imports_the_cli():
    for path in (REPO / "chargeplan").rglob("*.py"):
        if path.name in ("cli.py", "__main__.py"):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                names = [node.module or ""]
            for name in names:
                assert not name.startswith(("typer", "click", "chargeplan.cli")), (
                    f"{path.relative_to(REPO)} imports {name}"
                )


def test_safety_shares_no_code_with_the_rules():
    tree = ast.parse((REPO / "chargeplan" / "safety.py").read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            assert not (node.module or "").startswith("chargeplan.engine"), node.module
