"""``advisor demo copy DIR``: an editable copy of the invented demo site that stays honest about it."""

from __future__ import annotations

import json

from advisor.commands.demo import COPIED, RULES_NAME, SITE_NAME
from advisor.commands.main import main
from advisor.io.bundled import demo_dir
from advisor.io.site import load_site


def test_copy_writes_an_editable_site_that_runs_and_still_says_demo(tmp_path, capsys):
    folder = tmp_path / "my_site"
    assert main(["demo", "copy", str(folder)]) == 0
    out = capsys.readouterr().out
    assert f"advisor check --site {folder / SITE_NAME}" in out
    for name, _ in COPIED:
        assert (folder / name).read_bytes() == (demo_dir() / name).read_bytes()
    site = load_site(folder / SITE_NAME)
    assert site.rule_paths == (folder / RULES_NAME,) and site.feed.path == folder / "larch_basin_mast.csv"
    assert main(["rules", "lint", "--site", str(folder / SITE_NAME)]) == 0
    from advisor.catalogue import CATALOGUE
    from advisor.rules.loader import default_rule_files, lint_files

    n_default = len(lint_files([(p, "default") for p in default_rule_files()], CATALOGUE).ruleset)
    assert capsys.readouterr().out.startswith(f"ok: {n_default} rules in effect ({n_default - 1} default, 1 site)")
    assert main(["check", "--site", str(folder / SITE_NAME), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["demo_data"] is True  # the feed is still the demo's


def test_copy_refuses_to_overwrite_and_writes_nothing(tmp_path, capsys):
    (tmp_path / "references.csv").write_text("time,air_temp_c,note\n")
    assert main(["demo", "copy", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("advisor: error: ") and "references.csv already exists" in err and err.count("\n") == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["references.csv"]
    assert (tmp_path / "references.csv").read_text() == "time,air_temp_c,note\n"


def test_copy_into_a_file_is_refused(tmp_path, capsys):
    target = tmp_path / "file.txt"
    target.write_text("x")
    assert main(["demo", "copy", str(target)]) == 2
    assert "is a file, not a folder" in capsys.readouterr().err
