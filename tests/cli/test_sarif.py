"""Validates `sdeck check --format sarif` against the SARIF 2.1.0 JSON schema.

Run with pytest (it builds nothing: set SDECK to the binary, default target/debug/sdeck),
or as a script on report files: `python3 tests/cli/test_sarif.py report.sarif ...`,
which exits 1 on the first invalid report. The Rust end-to-end tests call the script form.
"""

import json
import os
import pathlib
import subprocess
import sys

import jsonschema

ROOT = pathlib.Path(__file__).resolve().parents[2]
SCHEMA_PATH = ROOT / "tests" / "schemas" / "sarif-2.1.0.json"


def schema():
    with open(SCHEMA_PATH, encoding="utf-8") as f:
        return json.load(f)


def validate(report):
    """Raises jsonschema.ValidationError when `report` is not a valid SARIF 2.1.0 log."""
    validator_class = jsonschema.validators.validator_for(schema())
    validator_class(schema()).validate(report)


def sdeck_binary():
    return os.environ.get("SDECK", str(ROOT / "target" / "debug" / "sdeck"))


def run_sarif(*paths):
    done = subprocess.run(
        [sdeck_binary(), "check", "--format", "sarif", *paths],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode in (0, 1), done.stderr
    return json.loads(done.stdout)


def test_flawed_fixtures_give_valid_sarif():
    report = run_sarif("demo-models/flawed")
    validate(report)
    results = report["runs"][0]["results"]
    assert {r["ruleId"] for r in results} >= {"feller-condition", "syntax", "unused"}


def test_sound_models_give_valid_sarif_with_the_rule_catalogue():
    report = run_sarif("demo-models")
    validate(report)
    rules = report["runs"][0]["tool"]["driver"]["rules"]
    assert len(rules) >= 16
    assert all(r["shortDescription"]["text"] and r["fullDescription"]["text"] for r in rules)


def test_an_invalid_report_is_caught():
    # The validator must be able to fail: a result without a message is not SARIF.
    report = run_sarif("demo-models/flawed/feller-condition.sde")
    del report["runs"][0]["results"][0]["message"]
    try:
        validate(report)
    except jsonschema.ValidationError:
        return
    raise AssertionError("a result without a message passed the schema")


def main(files):
    for name in files:
        with open(name, encoding="utf-8") as f:
            report = json.load(f)
        try:
            validate(report)
        except jsonschema.ValidationError as error:
            print(f"{name}: not valid SARIF 2.1.0: {error.message} at {list(error.absolute_path)}")
            return 1
        print(f"{name}: valid SARIF 2.1.0")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
