"""Tier 3: the explorer in Debian's Chromium, on the demo recording.

Each test opens a fresh session; the ``page`` fixture fails a test whose page
requested anything from a host other than the app's own, and saves a
screenshot to tests/artifacts/.
"""

import json

import pytest

pytestmark = pytest.mark.browser

# Sum of |values| and length of every plotted data column, by model id (plots update in place).
_PLOT_DATA = """() => {
  const out = {};
  for (const doc of Bokeh.documents) for (const m of doc.all_models) {
    if (!m.data) continue;
    const d = m.data instanceof Map ? Object.fromEntries(m.data) : m.data;
    const col = Object.keys(d).find(k => ['signal', 'gain', 'level', 'motion'].includes(k));
    if (!col) continue;
    const v = d[col]; let s = 0; for (let i = 0; i < v.length; i++) s += Math.abs(v[i]);
    out[m.id] = {column: col, n: v.length, sum: s};
  }
  return out;
}"""


def plot_data(page, column):
    return {k: v for k, v in page.evaluate(_PLOT_DATA).items() if v["column"] == column}


def number_input(page, label):
    return page.locator(".bk-input-group", has_text=label).locator("input").first


def enter(page, label, value):
    box = number_input(page, label)
    box.fill(str(value))
    box.press("Enter")


def test_cutoff_changes_overlay_and_processed_trace(page, wait_until):
    traces, gain = plot_data(page, "signal"), plot_data(page, "gain")
    assert len(traces) == 2 and all(0 < t["n"] <= 10_000 for t in traces.values())  # decimated for display
    enter(page, "Cutoff (Hz; band filters: low edge)", 100)
    page.get_by_text("100 Hz").first.wait_for(timeout=30_000)  # the design report beside the setting

    def changed():
        now_traces, now_gain = plot_data(page, "signal"), plot_data(page, "gain")
        moved = [k for k in traces if abs(now_traces[k]["sum"] - traces[k]["sum"]) > 1e-6 * traces[k]["sum"]]
        return moved and all(abs(now_gain[k]["sum"] - gain[k]["sum"]) > 1.0 for k in gain)

    wait_until(changed, what="processed trace and filter gain redrawn")
    assert "display reduced" not in page.content()  # the note is drawn in the canvas title, not the DOM


def test_cutoff_above_nyquist_shows_the_message(page):
    # the filter gain curve is not re-decimated by plot width (the traces are, when the layout settles)
    before = plot_data(page, "gain")
    enter(page, "Cutoff (Hz; band filters: low edge)", 3000)
    message = page.get_by_text("Nyquist for fs=5120 Hz")
    message.wait_for(timeout=20_000)
    assert "0 < cutoff < 2560 Hz" in message.inner_text()
    assert plot_data(page, "gain") == before  # the last good result stays on screen
    assert page.locator("table.st-kv", has_text="Cutoff (stated)").first.inner_text().count("5 Hz") >= 1
    enter(page, "Cutoff (Hz; band filters: low edge)", 20)
    message.wait_for(state="hidden", timeout=20_000)


def test_switch_integration_methods(page, wait_until):
    table = page.locator("table.st-table", has_text="residual_trend")
    table.wait_for(timeout=30_000)
    assert "baseline" in table.inner_text()
    page.get_by_role("button", name="baseline", exact=True).click()
    wait_until(lambda: "baseline" not in table.inner_text(), what="baseline left the comparison")
    wait_until(lambda: sum(1 for v in plot_data(page, "motion").values() if v["n"]) == 2,
               what="two integrated traces drawn")
    page.get_by_text("velocity in m/s").wait_for(timeout=20_000)
    page.get_by_role("button", name="displacement", exact=True).click()
    page.get_by_text("displacement in m,").wait_for(timeout=30_000)


def test_save_session_and_load_it_back(page, tmp_path, wait_until, artifacts):
    enter(page, "Cutoff (Hz; band filters: low edge)", 12.5)
    page.get_by_text("12.5 Hz").first.wait_for(timeout=20_000)
    with page.expect_download(timeout=30_000) as download:
        page.get_by_role("button", name="Download the session").click()
    path = tmp_path / "session.json"
    download.value.save_as(path)
    data = json.loads(path.read_text())
    assert data["format"] == "sigtune-session" and data["chain"][0]["cutoff"] == 12.5
    (artifacts / "browser-session.json").write_text(path.read_text())

    enter(page, "Cutoff (Hz; band filters: low edge)", 40)
    page.get_by_text("40 Hz").first.wait_for(timeout=20_000)
    page.locator("input[type=file][accept='.json']").set_input_files(str(path))
    wait_until(lambda: number_input(page, "Cutoff (Hz; band filters: low edge)").input_value() == "12.5",
               what="cutoff restored from the session")
    page.get_by_text("12.5 Hz").first.wait_for(timeout=20_000)
