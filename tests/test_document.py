"""The review document (landrisk report): structure, embedded figures, no external reference, and every
number traced back to the summary it was rendered from.

The HTML is parsed with html5lib, the parser of the WHATWG HTML standard's algorithm, not with the
templates' own code; the checks are against ``summary.json`` as written by the commands.
"""

from __future__ import annotations

import base64
import json
import re
from dataclasses import replace
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import html5lib
import pytest
from click.testing import CliRunner
from conftest import small_study_text

from landrisk import CAUTION, INVENTED_NOTE, api, invented
from landrisk.cli import main
from landrisk.document import SECTIONS, read_results, render_html, write_report
from landrisk.export import inputs_hash, write_ranking
from landrisk.studies import RankSettings
from landrisk.studies import rank as study_rank

# Rendering whole results folders and figures takes tens of seconds: the slow set (run by .ci/run).
pytestmark = pytest.mark.slow

ORDER = [sid for sid, _ in SECTIONS]
#: Attributes that make a browser fetch something.
URL_ATTRIBUTES = ("href", "src", "srcset", "action", "formaction", "poster", "data", "background", "cite",
                  "manifest", "ping", "longdesc", "usemap", "{http://www.w3.org/1999/xlink}href")


def run(*args: str) -> Any:
    return CliRunner().invoke(main, list(args))


@pytest.fixture(scope="module")
def assessment_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo assessment written by the command line with --report (20 000 samples: a few overruns)."""
    out = tmp_path_factory.mktemp("assess") / "demo"
    r = run("assess", "--samples", "20000", "--seed", "1", "--out", str(out), "--report", "--quiet")
    assert r.exit_code == 0, r.output
    return out


@pytest.fixture(scope="module")
def ranking_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A small polynomial-chaos ranking of the demo (few calls, so the surrogate checks may fail: the
    document must then say so), written the way ``rank --out`` writes it, and its report."""
    scenario, uncertain = api.load_study()
    settings = RankSettings(calls=200, seed=2, mc_check=2000, surrogate_samples=20_000, risk_samples=2048,
                            tail_checks=50)
    result = replace(study_rank(scenario, uncertain.problem(), settings), record=uncertain.record())
    out = tmp_path_factory.mktemp("rank") / "demo"
    write_ranking(result, out, command="landrisk rank --calls 200")
    write_report(out)
    return out


@pytest.fixture(scope="module")
def rare_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """FORM on the demo, without the risk curve (cheap), by the command line with --report."""
    out = tmp_path_factory.mktemp("rare") / "demo"
    scenario, uncertain = api.load_study()
    result = api.rare(scenario, uncertain, method="form", risk_curve=False)
    api.write_rare(result, out, command="landrisk assess --method form")
    write_report(out)
    return out


ROOT = Path(__file__).resolve().parents[1]

STUDY = small_study_text()


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The study above, by the command line with --report."""
    folder = tmp_path_factory.mktemp("study")
    spec = folder / "study.toml"
    spec.write_text(STUDY, encoding="utf-8")
    out = folder / "out"
    r = run("study", str(spec), "--workers", "1", "--quiet", "--out", str(out), "--report")
    assert r.exit_code == 0, r.output
    return out


def parse(path: Path) -> Any:
    return html5lib.parse(path.read_text(encoding="utf-8"), treebuilder="etree", namespaceHTMLElements=False)


def summary_of(folder: Path) -> dict[str, Any]:
    name = next(n for n in ("ranking.json", "study.json", "summary.json") if (folder / n).exists())
    return json.loads((folder / name).read_text())


def text_of(el: Any) -> str:
    return " ".join("".join(el.itertext()).split())


def words_of(el: Any) -> str:
    """The text of a table, a space between its cells."""
    return " ".join(text_of(cell) for cell in el.iter() if cell.tag in ("td", "th"))


def lookup(summary: Any, path: str) -> Any:
    node = summary
    for part in path.split("/"):
        node = node[int(part)] if isinstance(node, list) else node[part]
    return node


_NUMBER = re.compile(r"[+-]?(\d[\d,]*)(\.\d+)?([eE][+-]?\d+)?")


def shown_matches(text: str, value: float) -> bool:
    """Whether the number shown (e.g. '3.000e-04', '1,900 m', '+5.03%') is ``value`` rounded to the
    digits shown: within half a unit of its last digit."""
    m = _NUMBER.search(text)
    assert m is not None, text
    shown = float(m.group(0).replace(",", ""))
    decimals = len(m.group(2)) - 1 if m.group(2) else 0
    exponent = int(m.group(3)[1:]) if m.group(3) else 0
    quantum = 10.0 ** (exponent - decimals)
    if text[m.end():].lstrip("\u00a0 ").startswith("%"):
        value = 100 * value
    return abs(shown - value) <= 0.5 * quantum * (1 + 1e-9) + 1e-12 * abs(value)


@pytest.mark.slow
@pytest.mark.parametrize("which", ["assessment_dir", "ranking_dir", "rare_dir", "study_dir"])
def test_every_section_is_present_in_reading_order(which: str, request: pytest.FixtureRequest) -> None:
    folder = request.getfixturevalue(which)
    doc = parse(folder / "report.html")
    ids = [el.get("id") for el in doc.iter("section")]
    assert [i for i in ids if i in ORDER] == ORDER
    for sid in ORDER:
        section = doc.find(f".//section[@id='{sid}']")
        assert section is not None and len(text_of(section)) > 40, sid


@pytest.mark.parametrize("which", ["assessment_dir", "ranking_dir", "rare_dir", "study_dir"])
def test_the_caution_comes_before_any_result(which: str, request: pytest.FixtureRequest) -> None:
    folder = request.getfixturevalue(which)
    doc = parse(folder / "report.html")
    order = list(doc.iter())
    caution = doc.find(".//*[@id='caution-text']")
    assert caution is not None and text_of(caution) == CAUTION
    first_number = next(el for el in order if el.get("data-value") is not None)
    assert order.index(caution) < order.index(first_number)
    assert order.index(caution) < order.index(doc.find(".//section[@id='answer']"))
    # The demo's description says its data are invented: the document says so, right after the caution.
    note = doc.find(".//*[@id='invented-data']")
    assert note is not None and INVENTED_NOTE in text_of(note)
    assert order.index(caution) < order.index(note) < order.index(doc.find(".//section[@id='question']"))


def test_invented_is_read_from_the_description() -> None:
    assert invented("Invented twin-jet on an invented runway")
    assert invented("data INVENTED for a course")
    assert not invented("Operator data, runway 09L survey 2024")
    assert not invented("uninvented")  # a word, not a substring
    assert not invented(None)


@pytest.mark.parametrize("which", ["assessment_dir", "ranking_dir", "rare_dir", "study_dir"])
def test_every_figure_is_embedded_and_nothing_is_fetched(which: str, request: pytest.FixtureRequest) -> None:
    folder = request.getfixturevalue(which)
    summary = summary_of(folder)
    doc = parse(folder / "report.html")
    svgs = [n for n in summary["files"].values() if n.endswith(".svg")]
    assert svgs or which == "rare_dir", "the folder has figures"  # FORM without its risk curve has none
    embedded = {}
    assert len(list(doc.iter("img"))) == len(list(doc.iter("figure")))
    for fig in doc.iter("figure"):
        src = fig.find("img").get("src")
        assert src.startswith("data:image/svg+xml;base64,")
        embedded[fig.get("id")] = base64.b64decode(src.split(",", 1)[1]).decode("utf-8")
    for name in svgs:
        assert embedded[f"fig-{name.removesuffix('.svg')}"] == (folder / name).read_text(encoding="utf-8")
    for el in doc.iter():
        for attr in URL_ATTRIBUTES:
            value = el.get(attr)
            if value is not None:
                assert value.startswith(("data:", "#")), (el.tag, attr, value[:80])
        assert "url(" not in (el.get("style") or "")
        assert el.tag not in ("script", "link", "iframe", "object", "embed", "base")
    for style in doc.iter("style"):
        assert "url(" not in style.text and "@import" not in style.text
    for svg in embedded.values():  # inside each figure, references are to the figure's own elements
        for ref in re.findall(r'(?:xlink:)?href="([^"]*)"', svg):
            assert ref.startswith("#"), ref


@pytest.mark.parametrize("which", ["assessment_dir", "ranking_dir", "rare_dir", "study_dir"])
def test_the_numbers_are_those_of_the_summary(which: str, request: pytest.FixtureRequest) -> None:
    folder = request.getfixturevalue(which)
    summary = summary_of(folder)
    doc = parse(folder / "report.html")
    keys = set()
    for el in doc.iter():
        path, value = el.get("data-key"), el.get("data-value")
        if value is None:
            continue
        keys.add(path)
        expected = lookup(summary, path)
        assert float(value) == float(expected), path  # repr of the float: exact
        assert shown_matches(text_of(el), float(expected)), (path, text_of(el), expected)
    required = {
        "assessment_dir": {"p_overrun", "p_overrun_ci95/0", "p_overrun_ci95/1", "percentiles_m/50",
                           "percentiles_m/99", "percentiles_ci95_m/99/0", "percentiles_ci95_m/99/1",
                           "p_beyond_resa/ci_hi", "overrun_ground_speed_max_mps", "samples", "seed",
                           "inputs/runway.lda", "inputs/runway.resa_length", "mean_m", "resa_length_m"},
        "ranking_dir": {"inputs/0/total", "inputs/0/first_order", "surrogate/p_overrun/estimate",
                        "chaos/holdout_rel_error", "chaos/tail_rel_rms", "mc_check/rel_diff/p99",
                        "inputs_used/runway.lda", "seed", "calls"},
        "rare_dir": {"p_overrun", "beta", "seed", "model_calls", "inputs/runway.lda"},
        "study_dir": {"cases/0/p_overrun", "cases/0/p_overrun_ci95/0", "cases/1/p_overrun_ci95/1",
                      "cases/0/percentiles_m/99", "comparisons/0/difference", "comparisons/0/ratio",
                      "exposure/overruns_per_year", "exposure/p_at_least_one_per_year", "seed", "samples",
                      "inputs/runway.lda"},
    }[which]
    assert required <= keys, required - keys


def test_the_assessment_answer_in_words(assessment_dir: Path) -> None:
    summary = summary_of(assessment_dir)
    doc = parse(assessment_dir / "report.html")
    answer = text_of(doc.find(".//*[@id='p-overrun']"))
    assert "Wilson" in answer and f"{summary['overruns']:,} overruns in {summary['samples']:,}" in answer
    beyond = text_of(doc.find(".//*[@id='p-beyond-resa']"))
    assert f"{summary['resa_length_m']:.0f} m runway end safety area" in beyond
    percentiles = words_of(doc.find(".//table[@id='percentiles']"))
    for p in summary["percentiles_m"]:
        assert f"P{p} " in percentiles
    for p in summary["unsupported_percentiles"]:
        assert f"P{p} needs more samples" in percentiles


def test_the_inputs_are_all_there_with_their_sources(assessment_dir: Path) -> None:
    summary = summary_of(assessment_dir)
    doc = parse(assessment_dir / "report.html")
    uncertain = words_of(doc.find(".//table[@id='uncertain-inputs']"))
    for key, spec in summary["uncertain"]["inputs"].items():
        assert key in uncertain and " ".join(spec["source"].split()) in uncertain
        assert f"distribution={spec['written']['distribution']}" not in uncertain  # the family leads
        assert uncertain.count(f"{spec['written']['distribution']}(") >= 1
    fixed = words_of(doc.find(".//table[@id='fixed-inputs']"))
    for key, value in summary["inputs"].items():
        if value is not None and not key.startswith("scenario."):
            assert key in fixed, key
    correlations = words_of(doc.find(".//table[@id='correlations']"))
    for c in summary["uncertain"]["correlations"]:
        assert all(k in correlations for k in c["between"]) and c["source"] in correlations
    assert "Gaussian copula" in text_of(doc.find(".//section[@id='inputs']"))
    bounds = text_of(doc.find(".//section[@id='checks']"))
    assert "procedure.reaction_time: lower 0.3 s, upper 6 s" in bounds  # the demo's truncation bounds


def test_the_provenance(assessment_dir: Path) -> None:
    summary = summary_of(assessment_dir)
    assert summary["command"] == ("landrisk assess --samples 20000 --seed 1 --out "
                                  f"{assessment_dir} --report --quiet")
    written = datetime.fromisoformat(summary["created_utc"])
    assert written.utcoffset().total_seconds() == 0
    assert abs((datetime.now(UTC) - written).total_seconds()) < 3600
    assert summary["inputs_sha256"] == inputs_hash(summary["inputs"], summary["uncertain"])
    prov = text_of(parse(assessment_dir / "report.html").find(".//section[@id='provenance']"))
    for text in (summary["version"], summary["created_utc"], summary["inputs_sha256"], summary["command"],
                 f"{summary['samples']:,}", summary["sampler"]):
        assert text in prov, text


def test_the_ranking_checks_say_what_failed(ranking_dir: Path) -> None:
    summary = summary_of(ranking_dir)
    doc = parse(ranking_dir / "report.html")
    checks = text_of(doc.find(".//section[@id='checks']"))
    assert ("FAILED" in checks) == (not summary["chaos"]["tail_ok"])
    for w in summary["warnings"]:
        assert " ".join(w.split()) in checks
    ranking = words_of(doc.find(".//table[@id='indices']"))
    assert [i["name"] for i in summary["inputs"]] == re.findall(r"\b[a-z]+\.[a-z_.]+\b", ranking)[
        : len(summary["inputs"])]


def test_an_edited_summary_is_noticed(assessment_dir: Path, tmp_path: Path) -> None:
    copy = tmp_path / "edited"
    copy.mkdir()
    for f in assessment_dir.iterdir():
        (copy / f.name).write_bytes(f.read_bytes())
    summary = summary_of(copy)
    summary["inputs"]["runway.lda"] = 2500.0
    (copy / "summary.json").write_text(json.dumps(summary))
    assert read_results(copy).hash_matches is False
    assert "do NOT hash" in text_of(parse_text(render_html(read_results(copy))))


def parse_text(text: str) -> Any:
    return html5lib.parse(text, treebuilder="etree", namespaceHTMLElements=False)


def test_report_command_and_its_errors(assessment_dir: Path, tmp_path: Path) -> None:
    out = tmp_path / "elsewhere" / "review.html"
    r = run("report", str(assessment_dir), "--out", str(out))
    assert r.exit_code == 0, r.output
    assert out.is_file() and CAUTION in r.output
    again = run("report", str(assessment_dir))  # report.html is there from --report
    assert again.exit_code == 2 and "--force" in again.stderr and "Traceback" not in again.output
    for args, needle in [((str(tmp_path / "none"),), "no such results folder"),
                         ((str(tmp_path),), "no landrisk results here"),
                         ((str(assessment_dir), "--out", str(tmp_path / "r.txt")), "must end in .html")]:
        bad = run("report", *args)
        assert bad.exit_code == 2 and needle in bad.stderr, bad.output
        assert len(bad.stderr.strip().splitlines()) == 1
    (tmp_path / "summary.json").write_text("{not json")
    bad = run("report", str(tmp_path))
    assert bad.exit_code == 2 and "not valid JSON" in bad.stderr


def test_the_study_document(study_dir: Path) -> None:
    summary = summary_of(study_dir)
    doc = parse(study_dir / "report.html")
    assert read_results(study_dir).kind == "study"
    cases = doc.find(".//table[@id='study-cases']")
    assert cases is not None and all(c["name"] in words_of(cases) for c in summary["cases"])
    assert "against" in words_of(doc.find(".//table[@id='study-comparisons']"))
    yearly = text_of(doc.find(".//*[@id='yearly-risk']"))
    assert "8,000 landings a year" in yearly and "at least one" in yearly
    assert summary["exposure"]["target_status"] in text_of(doc.find(".//*[@id='target']"))
    figures = {f.get("id") for f in doc.find(".//section[@id='answer']").iter("figure")}
    assert {"fig-study-cases", "fig-study-comparisons", "fig-study-yearly"} <= figures
    # the base scenario's uncertain inputs, each with its source line
    rows = doc.find(".//table[@id='uncertain-inputs']")
    assert rows is not None and all(k in words_of(rows) for k in summary["uncertain"]["inputs"])
    assert read_results(study_dir).hash_matches is True


def test_report_needs_out() -> None:
    for cmd in (["assess"], ["rank"], ["study", str(ROOT / "configs" / "studies" / "invented-study.toml")]):
        r = run(*cmd, "--report")
        assert r.exit_code == 2 and "--report needs --out" in r.output
