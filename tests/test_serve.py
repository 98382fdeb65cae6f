"""``planner serve``: the API against the plan of the hand-edited scenario file (the definition of a change),
every refusal a 4xx with its message and never a traceback, saves to a copy only, and the page in real
headless Chromium re-planning as a capacity is typed in."""

from __future__ import annotations

import json
import socket

import pytest
import yaml
from click.testing import CliRunner

from planner.cli.main import main
from planner.cli.serve import ServeError, allowed_hosts, bind, copy_path

from .browser import find_chromium, open_page
from .serving import call, running

needs_chromium = pytest.mark.skipif(find_chromium() is None,
                                    reason="no Chromium binary (Debian: apt-get install chromium; .ci/run does this)")
BOOTH = "finishing booth"


@pytest.fixture(scope="module")
def server(tmp_path_factory, demo_path):
    folder = tmp_path_factory.mktemp("serve")
    with running(demo_path, folder / "demo-what-if.yaml") as (url, state):
        yield url, state, folder


def hand_edited_plan(demo_path, folder, name: str, edit) -> dict:
    """`planner plan --json` of the demo file with ``edit`` applied to its raw numbers by hand."""
    raw = yaml.safe_load(demo_path.read_text(encoding="utf-8"))
    edit(raw)
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump(raw, sort_keys=False, allow_unicode=True), encoding="utf-8")
    out = folder / f"{name}.json"
    res = CliRunner().invoke(main, ["plan", str(path), "--json", str(out), "--no-capacity", "--no-decisions", "-q"])
    assert res.exit_code == 0, res.output
    return json.loads(out.read_text())


def resource(raw: dict, name: str) -> dict:
    return next(r for r in raw["resources"] if r["name"] == name)


def product(raw: dict, name: str) -> dict:
    return next(p for p in raw["products"] if p["name"] == name)


def agree(api: dict, ref: dict) -> None:
    """Same plan to the certified gap: profit within 1e-4 relative, the same products running, volumes close."""
    assert api["profit"] == pytest.approx(ref["profit"], rel=1e-4)
    assert [p["running"] for p in api["products"]] == [p["running"] for p in ref["products"]]
    for a, b in zip(api["products"], ref["products"]):
        assert a["volume"] == pytest.approx(b["volume"], rel=1e-3, abs=1e-3), a["name"]


def test_no_changes_answer_the_plan_json(server, demo_path):
    url, _, folder = server
    status, plan, headers = call(url + "/api/plan", {"changes": []})
    assert status == 200
    ref = hand_edited_plan(demo_path, folder, "as-written", lambda raw: None)
    assert set(ref) <= set(plan)  # the same keys as planner plan --json (and a few of its own)
    agree(plan, ref)
    assert headers["content-type"].startswith("application/json")
    assert "default-src 'none'" in headers["content-security-policy"]


def test_changes_answer_the_plan_of_the_hand_edited_file(server, demo_path):
    url, _, folder = server

    def edit(raw):  # the same three changes, made by hand in the file
        resource(raw, BOOTH)["capacity"] = 3900 + 624
        product(raw, "oak bookcase")["price_intercept"] = 620 * 0.95
        product(raw, "walnut desk")["fixed_cost"] = 80000
    ref = hand_edited_plan(demo_path, folder, "edited", edit)
    status, plan, _ = call(url + "/api/plan", {"changes": [
        {"resource": BOOTH, "field": "capacity", "add": 624},
        {"product": "oak bookcase", "field": "price_intercept", "scale": 0.95},
        {"product": "walnut desk", "field": "fixed_cost", "set": "80000"}]})
    assert status == 200, plan
    agree(plan, ref)
    assert plan["touches_people"] is True  # a work centre's hours changed: the labour note applies
    assert plan["replan"]["route"] == "warm"


def test_an_option_taken_is_its_capacity_and_its_cost(server, demo_path):
    """Taking the Saturday shift = 624 h more in finishing and 21,000 more fixed cost (the scenario's option)."""
    url, _, folder = server

    def edit(raw):
        resource(raw, BOOTH)["capacity"] = 3900 + 624
        raw["plant_fixed_cost"] = 60000 + 21000
    ref = hand_edited_plan(demo_path, folder, "saturday", edit)
    status, plan, _ = call(url + "/api/plan", {"changes": [
        {"option": "Saturday shift in finishing", "field": "taken", "set": 1}]})
    assert status == 200
    agree(plan, ref)
    # The README's worked figure: the shift's net gain on the demo is 32,541 after its 21,000.
    _, base, _ = call(url + "/api/plan", {"changes": []})
    assert plan["profit"] - base["profit"] == pytest.approx(32541, abs=1)


def test_a_cap_change_is_planned_afresh_and_still_equals_the_file(server, demo_path):
    url, _, folder = server
    ref = hand_edited_plan(demo_path, folder, "capped", lambda raw: product(raw, "oak bookcase")
                           .__setitem__("max_volume", 300))
    status, plan, _ = call(url + "/api/plan", {"changes": [{"product": "oak bookcase", "field": "max_volume",
                                                            "set": 300}]})
    assert status == 200
    agree(plan, ref)
    assert plan["replan"]["route"] == "fresh"


@pytest.mark.parametrize("changes,code,message", [
    ([{"resource": "finishing bot", "field": "capacity", "add": 5}], 422,
     "changes[1].resource: names a resource that is not defined ('finishing bot') (did you mean 'finishing booth'?)"),
    ([{"resource": BOOTH, "field": "capacity", "set": "1,000"}], 422,
     "changes[1].set: must be a plain number (got '1,000') (write 1000 without thousands separators)"),
    ([{"resource": BOOTH, "field": "capacity", "set": "0400"}], 422,
     "changes[1].set: must be a plain decimal number: '0400' has a leading zero (write 400)"),
    ([{"resource": BOOTH, "field": "capacity", "add": -5000}], 422,
     "changes[1]: makes resources[finishing booth].capacity -1100, but it must be >= 0 (change it so the result "
     "is 0 or more)"),
    ([{"product": "oak bookcase", "field": "unit_cost", "add": 1, "scale": 2}], 422,
     "changes[1]: needs exactly one of 'set', 'add' or 'scale' (gives add and scale) (set: the new value; add: an "
     "amount added to it; scale: a factor it is multiplied by)"),
    ([{"resource": BOOTH, "feild": "capacity", "add": 5}], 422, "changes[1].feild: unknown key (did you mean 'field'?)"),
    ([{"option": "Saturday shift in finishing", "field": "taken", "set": 0.5}], 422,
     "changes[1]: makes the share of options[Saturday shift in finishing] taken 0.5, but it is all or nothing: 0 or "
     "1 (set: 1 to take it, set: 0 to leave it)"),
    ({"a": 1}, 422, "changes: must be a list of changes (got dict)"),
    ([7], 422, "changes[1]: must be a mapping of keys (got int)"),
])
def test_a_bad_change_is_refused_with_its_message_and_the_server_keeps_serving(server, changes, code, message):
    url, _, _ = server
    status, answer, _ = call(url + "/api/plan", {"changes": changes})
    assert status == code
    assert answer["error"].startswith(message), answer["error"]
    assert "Traceback" not in json.dumps(answer)
    assert call(url + "/api/plan", {"changes": []})[0] == 200  # still serving


def test_an_infeasible_change_names_the_limits(server):
    url, _, _ = server
    status, answer, _ = call(url + "/api/plan", {"changes": [{"resource": "saw line", "field": "capacity", "set": 10}]})
    assert status == 422 and answer["status"] == "infeasible"
    assert "committed volume of birch nightstand (400 units) needs 120 h of saw line; it has 10 h" in answer["error"]


@pytest.mark.parametrize("body,content_type,code,start", [
    (b"[", "application/json", 400, "the request body is not valid JSON"),
    (b'{"changes": [{"resource": "saw line", "field": "capacity", "set": NaN}]}', "application/json", 400,
     "the request body is not valid JSON (NaN is not a JSON number"),
    (b"\xff\xfe", "application/json", 400, "the request body is not UTF-8 text"),
    (b'{"changes": []}', "text/plain", 415, "send the body as application/json"),
    (b"[]", "application/json", 400, 'the body must be a JSON object: {"changes": [...]}'),
    (b'{"changes": [], "path": "/etc/passwd"}', "application/json", 400, "unknown key in the body: 'path'"),
    (b"[" * 100_000 + b"]" * 100_000, "application/json", 400, "the request body is nested too deeply"),
], ids=["truncated", "nan", "not-utf8", "text-plain", "a-list", "a-path", "too-deep"])
def test_bodies_that_are_not_a_request_are_refused(server, body, content_type, code, start):
    url, _, _ = server
    status, answer, _ = call(url + "/api/plan", body, content_type=content_type)
    assert status == code and answer["error"].startswith(start), answer


@pytest.mark.parametrize("chunked", [False, True], ids=["declared-length", "streamed"])
def test_a_body_over_the_limit_is_refused_before_it_is_read(server, chunked):
    """413 on the declared length alone, or once a streamed (chunked) body passes 1 MiB."""
    import http.client
    from urllib.parse import urlsplit

    url, _, _ = server
    conn = http.client.HTTPConnection(urlsplit(url).hostname, urlsplit(url).port, timeout=60)
    try:
        conn.putrequest("POST", "/api/plan")
        conn.putheader("Content-Type", "application/json")
        if chunked:
            conn.putheader("Transfer-Encoding", "chunked")
            conn.endheaders()
            piece = b" " * 65536
            try:
                for _ in range(17):  # 17 × 64 KiB > 1 MiB
                    conn.send(b"%x\r\n%s\r\n" % (len(piece), piece))
            except (BrokenPipeError, ConnectionResetError):
                pass  # the server answered and closed: read its answer
        else:
            conn.putheader("Content-Length", str((1 << 20) + 1))
            conn.endheaders()
        res = conn.getresponse()
        answer = json.loads(res.read())
    finally:
        conn.close()
    assert res.status == 413
    assert answer["error"] == "the request body is larger than 1,048,576 bytes; send fewer changes"


def test_other_hosts_paths_and_methods_are_refused(server):
    url, _, _ = server
    assert call(url + "/", headers={"Host": "planner.example"})[0] == 400  # a renamed host cannot reach the API
    status, answer, _ = call(url + "/nothing")
    assert status == 404 and "POST /api/plan" in answer["error"]
    assert call(url + "/api/plan")[0] == 405
    assert call(url + "/api/plan", {"changes": []}, method="PUT")[0] == 405


def test_save_as_variant_writes_a_copy_and_never_the_scenario(server, demo_path):
    url, state, folder = server
    before = demo_path.read_bytes()
    changes = [{"resource": BOOTH, "field": "capacity", "add": 300}]
    status, answer, _ = call(url + "/api/save", {"name": "booth +300 h", "description": "an idea", "changes": changes})
    assert status == 200, answer
    assert answer["file"] == str(folder / "demo-what-if.yaml")
    assert demo_path.read_bytes() == before
    from planner import load_scenario
    from planner.api import plan
    from planner.scenario.variants import variant_scenario

    copy, _ = load_scenario(folder / "demo-what-if.yaml")
    assert [v.name for v in copy.variants][-1] == "booth +300 h"
    _, api, _ = call(url + "/api/plan", {"changes": changes})
    assert plan(variant_scenario(copy, "booth +300 h")).profit == pytest.approx(api["profit"], rel=1e-4)
    # a second save keeps the first; a name already used is refused with the name rule's message
    assert call(url + "/api/save", {"name": "cheaper oak", "changes": [
        {"product": "oak bookcase", "field": "unit_cost", "add": -10}]})[0] == 200
    status, answer, _ = call(url + "/api/save", {"name": "Booth +300 h", "changes": changes})
    assert status == 422
    assert answer["error"] == ("variants[Booth +300 h]: differs from variants[booth +300 h] only in case (names must "
                               "differ by more than case, spacing or how accents are encoded: rename one)")
    copy, _ = load_scenario(folder / "demo-what-if.yaml")
    assert [v.name for v in copy.variants][-2:] == ["booth +300 h", "cheaper oak"]
    for body, start in (({"changes": changes}, "give the variant a name"),
                        ({"name": "nothing", "changes": []}, "there are no changes to save")):
        status, answer, _ = call(url + "/api/save", body)
        assert status == 422 and answer["error"].startswith(start)


def test_the_copy_gets_a_free_name_beside_the_scenario(tmp_path):
    src = tmp_path / "plant.yaml"
    src.write_text("x")
    assert copy_path(src) == tmp_path / "plant-what-if.yaml"
    (tmp_path / "plant-what-if.yaml").write_text("mine")
    assert copy_path(src) == tmp_path / "plant-what-if-2.yaml"
    folder = tmp_path / "plant_csv"
    folder.mkdir()
    assert copy_path(folder) == tmp_path / "plant_csv-what-if"


def test_serve_refuses_to_start_where_it_cannot(tmp_path, demo_path):
    taken = tmp_path / "mine.yaml"
    taken.write_text("keep me")
    res = CliRunner().invoke(main, ["serve", str(demo_path), "--save-to", str(taken)])
    assert res.exit_code == 2 and "exists; 'save as variant' writes a new copy" in res.stderr
    assert taken.read_text() == "keep me"
    res = CliRunner().invoke(main, ["serve", str(demo_path), "--save-to", str(tmp_path / "copy.txt")])
    assert res.exit_code == 2 and "unsupported target form '.txt'" in res.stderr
    sock = bind("127.0.0.1", 0)
    try:
        with pytest.raises(ServeError, match=r"is in use by another program; give another --port"):
            bind("127.0.0.1", sock.getsockname()[1])
    finally:
        sock.close()
    with pytest.raises(ServeError, match="not an address of this machine"):
        bind("no-such-host.invalid", 0)


def test_the_default_binds_the_loopback_only():
    assert allowed_hosts("127.0.0.1") == ["127.0.0.1", "localhost", "::1"]
    assert allowed_hosts("0.0.0.0") == ["*"]
    sock = bind("127.0.0.1", 0)
    try:
        assert sock.getsockname()[0] == "127.0.0.1" and sock.family == socket.AF_INET
    finally:
        sock.close()
    from planner.cli.serve import register  # noqa: F401  (the command's default host)

    opt = next(p for p in main.commands["serve"].params if p.name == "host")
    assert opt.default == "127.0.0.1"


@needs_chromium
def test_the_page_replans_when_a_capacity_is_typed(server, demo_path):
    """Load the page, type a new capacity for the finishing booth, see the new profit (that of the edited file)."""
    url, _, folder = server
    ref = hand_edited_plan(demo_path, folder, "typed", lambda raw: resource(raw, BOOTH).__setitem__("capacity", 4200))
    wait = ("new Promise((ok) => {{ const t0 = Date.now(); (function w() {{ if ({cond} || Date.now() - t0 > 30000) "
            "ok({value}); else setTimeout(w, 25); }})(); }})")
    queries = {
        "first": wait.format(cond="document.body.dataset.plans === '1'", value="document.getElementById('profit')"
                             ".textContent"),
        "typed": "(() => { const el = document.querySelector('input[data-kind=resource][data-index=\"2\"]'); "
                 "el.value = '4200'; el.dispatchEvent(new Event('input')); return el.getAttribute('aria-label'); })()",
        "second": wait.format(cond="document.body.dataset.plans === '2'",
                              value="[document.getElementById('profit').textContent, "
                                    "document.getElementById('change').textContent, "
                                    "document.getElementById('mix-chart').dataset.bars, "
                                    "document.getElementById('use-chart').dataset.bars, "
                                    "document.querySelector('#resources-table tbody tr:nth-child(3) td:nth-child(3)')"
                                    ".textContent]"),
        "bad": "(() => { const el = document.querySelector('input[data-kind=resource][data-index=\"2\"]'); "
               "el.value = '4,200'; el.dispatchEvent(new Event('input')); return true; })()",
        "refused": wait.format(cond="document.body.dataset.state === 'error'",
                               value="[document.getElementById('error').textContent, "
                                     "document.querySelector('input.bad') !== null, "
                                     "document.getElementById('profit').textContent]"),
    }
    page = open_page(url + "/", queries, allowed=(url + "/",))
    # Chromium logs every 4xx answer as a failed load: the one refused change, and nothing else
    assert page.console_errors == ["Failed to load resource: the server responded with a status of 422 "
                                   "(Unprocessable Entity)"], page.console_errors
    assert not page.exceptions and not page.outside_requests
    assert page.values["typed"] == "capacity of finishing booth"
    profit, change, mix_bars, use_bars, capacity = page.values["second"]
    assert profit == f"€{ref['profit']:,.0f}"
    assert page.values["first"] != profit and change.endswith("against the scenario")
    assert (mix_bars, use_bars) == ("7", "5") and capacity == "4,200 h"
    message, marked, kept = page.values["refused"]
    assert message.startswith("changes[1].set: must be a plain number (got '4,200')") and marked
    assert kept == profit  # the last good plan stays
