"""The stand page in a real headless Chromium, following a real capture of `saglog simulate --pty`.

What the page shows is checked against summary.json of the same run (the
run folder is the reference: it is what every other view and report reads),
after each seating.  The connection is cut for real (a loopback relay between
the browser and the server is closed) and restored.  Phone-size screenshots
are taken; with SAGLOG_DOCS_PICTURES=1 they go into docs/ for the README.
"""

from __future__ import annotations

import json
import os
import signal
import struct

from tests.helpers.paths import ROOT
from tests.helpers.stand import READ_PAGE, phone, start_capture, start_simulator, url_port, wait_for
from tests.helpers.tcpproxy import Relay

SCENARIO = "demo-150-f8-fine"
SPEED = 2.5  # the invented session, two and a half times as fast
CUT_AFTER = 6  # seatings before the connection is cut
SHOTS_AFTER = 14  # the last surface seating of the scenario: the pictures show the whole result, mid-session
SHOTS = (("stand-portrait.png", 390, 844, "dark"), ("stand-landscape.png", 844, 390, "dark"),
         ("stand-light.png", 390, 844, "light"))


def read_summary(out):
    try:
        return json.loads((out / "summary.json").read_text())
    except (FileNotFoundError, json.JSONDecodeError):
        return None


def counts_of(summary: dict) -> tuple[str, str, str]:
    return tuple(str(summary[k]) for k in ("seatings_flat", "seatings_surface", "seatings_rejected"))


def page_agrees(driver, out):
    """The page and summary.json read at the same moment, when the page shows the summary's counts."""
    summary, page = read_summary(out), driver.execute_script(READ_PAGE)
    if summary and page["link"] == "up" and (page["flat"], page["surface"], page["rejected"]) == counts_of(summary):
        return summary, page
    return None


def check_radius(page: dict, summary: dict) -> None:
    if summary["radius_mm"] is None:
        assert page["radius"] == "\u2013"
    else:  # shown to 0.1 mm, as the terminal shows it
        assert abs(float(page["radius"]) - summary["radius_mm"]) <= 0.05 + 1e-9, (page, summary["radius_mm"])
        assert page["unit"] == "mm"


def cut_and_recover(driver, relay: Relay, out) -> set[int]:
    """Cut the link, see the page say so, let seatings happen meanwhile, restore; returns the totals missed."""
    before = read_summary(out)["seatings_total"]
    relay.cut()
    wait_for(lambda: driver.execute_script(READ_PAGE)["lost_shown"], 15, "the page to show the lost connection")
    assert driver.execute_script(READ_PAGE)["link"] == "down"
    after = wait_for(lambda: read_summary(out)["seatings_total"] > before and read_summary(out)["seatings_total"],
                     30, "a seating while the page is cut off")
    relay.restore()
    summary, page = wait_for(lambda: page_agrees(driver, out), 30, "the page to reconnect and catch up")
    assert not page["lost_shown"]
    check_radius(page, summary)
    return set(range(before + 1, after + 1))


def png_size(path) -> tuple[int, int]:
    head = path.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (ISO/IEC 15948)
    return struct.unpack(">II", head[16:24])


def screenshots(driver, folder) -> None:
    for name, width, height, scheme in SHOTS:
        phone(driver, width, height, scheme)
        wait_for(lambda: driver.execute_script("return [innerWidth, innerHeight]") == [width, height], 10,
                 f"the {width}x{height} viewport, not {driver.execute_script('return [innerWidth, innerHeight]')}")
        driver.save_screenshot(str(folder / name))
        assert png_size(folder / name) == (2 * width, 2 * height)
        # the radius fits the screen: its digits are not cut off at either side
        left, right = driver.execute_script("const r = document.createRange(); "
                                            "r.selectNodeContents(document.getElementById('radius')); "
                                            "const b = r.getBoundingClientRect(); return [b.left, b.right];")
        assert 0 <= left and right <= width


def test_the_page_follows_a_real_capture_seating_by_seating(browser, tmp_path):
    sim, pty = start_simulator("--scenario", SCENARIO, "--speed", SPEED)
    out = tmp_path / "run"
    cap, url = start_capture(pty, out, "--profile", "example-three-ball", "--web", "127.0.0.1:0",
                             "--target-radius", 2400, "--diameter", 150)
    relay = Relay(("127.0.0.1", url_port(url)))
    checked, missed = set(), set()

    def next_seating():
        """The page agreeing with summary.json on a seating not checked yet; "done" once the session is over."""
        agree = page_agrees(browser, out)
        if agree and agree[0]["seatings_total"] not in checked:
            return agree
        return "done" if agree and sim.poll() is not None else None

    try:
        browser.get(f"http://127.0.0.1:{relay.port}/")
        while (seen := wait_for(next_seating, 60, f"the page after seating {len(checked)}")) != "done":
            summary, page = seen
            check_radius(page, summary)
            checked.add(summary["seatings_total"])
            if len(checked) == CUT_AFTER and not missed:
                missed = cut_and_recover(browser, relay, out)
            if summary["seatings_total"] == SHOTS_AFTER:
                screenshots(browser, ROOT / "docs" if os.environ.get("SAGLOG_DOCS_PICTURES") else tmp_path)
                phone(browser, 390, 844)
        last = read_summary(out)["seatings_total"]
        assert last > SHOTS_AFTER and set(range(1, last + 1)) <= checked | missed  # each seated on the page, or caught up
        assert missed and summary["radius_U_mm"] is not None and page["verdict"].startswith(f"seating {last} on ")
        cap.send_signal(signal.SIGTERM)
        assert cap.wait(30) == 0, cap.stderr.read()
        wait_for(lambda: browser.execute_script(READ_PAGE)["over_shown"], 15, "the page to say the run ended")
        final = browser.execute_script(READ_PAGE)
        assert not final["lost_shown"] and final["radius"] == page["radius"]
    finally:
        relay.cut()
        for proc in (cap, sim):
            if proc.poll() is None:
                proc.kill()
            proc.wait(10)


def test_the_page_says_past_the_target_in_words(browser):
    # an invented state ground 46.4 mm past a 2450 mm target, then one 3.6 mm short of 2400 mm: the
    # captions follow, and the distances carry no sign (as the terminal's end lines and panel)
    from logger.live.stand.address import WebAddress
    from logger.live.stand.server import StandServer

    read = ("const t = (id) => document.getElementById(id).textContent; "
            "return ['togo-caption', 'togo-radius', 'togo-sagitta-caption', 'togo-sagitta', "
            "'togo-depth-caption', 'togo-depth'].map(t);")
    past = {"state": "lifted", "unit": "mm", "radius_mm": 2403.6, "radius_U_mm": 10.9, "target_radius_mm": 2450.0,
            "radius_to_go_mm": -46.4, "sagitta_to_go_mm": -0.0011, "depth_to_go_mm": -0.0227,
            "depth_to_go_U_mm": 0.0053, "seatings_flat": 4, "seatings_surface": 9, "seatings_rejected": 0}
    server = StandServer(WebAddress("127.0.0.1", 0), None)
    port = server.start()
    try:
        server.publish(past)
        browser.get(f"http://127.0.0.1:{port}/")
        shown = wait_for(lambda: (v := browser.execute_script(read))[1] != "\u2013" and v, 15, "the page to show it")
        assert shown == ["radius past the target of 2450.0 mm", "46.4 mm", "sagitta past the target", "0.0011 mm",
                         "depth ground past the target at the centre", "0.0227 \u00b1 0.0053 mm"]
        server.publish(dict(past, radius_mm=2403.6, target_radius_mm=2400.0, radius_to_go_mm=3.6,
                            sagitta_to_go_mm=0.0005, depth_to_go_mm=0.0018))
        shown = wait_for(lambda: (v := browser.execute_script(read))[1] == "3.6 mm" and v, 15, "the page to follow")
        assert shown == ["radius still to go to 2400.0 mm", "3.6 mm", "sagitta still to go", "0.0005 mm",
                         "depth still to grind at the centre", "0.0018 \u00b1 0.0053 mm"]
    finally:
        server.stop()
