"""End-to-end: a demo notebook run in JupyterLab, in headless Debian Chromium driven by Playwright.

Serves JupyterLab on 127.0.0.1, runs every cell, waits for typeset math and the check panel,
presses the panel's button and expects the result text to change. A screenshot is saved in
``test-artifacts/``; with ``GRADWRIGHT_UPDATE_SCREENSHOT=1`` it is also copied to
``docs/screenshot.png`` for the README. ``GRADWRIGHT_BROWSER_NOTEBOOK=path.ipynb`` runs another
notebook the same way (it needs a check panel).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]
CHROMIUM = Path("/usr/bin/chromium")
ARTIFACTS = ROOT / "test-artifacts"
DEMO = ROOT / "notebooks_demo" / "store_week_demand.ipynb"
#: the widest derivation (two Jacobians of a two-layer map): checked for layout too
WIDE_DEMO = ROOT / "notebooks_demo" / "robot_arm_jacobians.ipynb"
#: the output width the layout must fit (a 1,280 px window with the side bar closed)
OUTPUT_WIDTH = 1100
# Flags measured to work on our machines (testing-stack.md).
CHROMIUM_FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
SERVER_START_TIMEOUT = 120  # seconds; a cold JupyterLab start on 2 cores takes ~10 s
CELL_TIMEOUT_MS = 120_000


def _ensure_chromium() -> None:
    if CHROMIUM.exists():
        return
    script = ROOT / "scripts" / "install-browser.sh"
    try:
        subprocess.run(["bash", str(script)], check=True, timeout=900)
    except (subprocess.SubprocessError, OSError) as err:
        pytest.skip(f"Debian chromium could not be installed by {script.name}: {err}")
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is still missing after {script.name}")


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _write_settings(settings_dir: Path) -> None:
    """User settings that keep news, update checks and toasts out of the screenshots."""
    notification = settings_dir / "@jupyterlab" / "apputils-extension"
    notification.mkdir(parents=True, exist_ok=True)
    (notification / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False, "doNotDisturbMode": True})
    )


def _wait_for_server(url: str, proc: subprocess.Popen, log: Path) -> None:
    deadline = time.monotonic() + SERVER_START_TIMEOUT
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"JupyterLab exited early:\n{log.read_text()[-3000:]}")
        try:
            with urllib.request.urlopen(url, timeout=5) as response:
                if response.status == 200:
                    return
        except OSError:
            pass
        time.sleep(0.5)
    raise RuntimeError(f"JupyterLab did not answer within {SERVER_START_TIMEOUT} s")


def _stop_server(proc: subprocess.Popen) -> None:
    if proc.poll() is not None:
        return
    # SIGINT twice is the server's own "shut down now" (it stops its kernels first).
    for sig in (signal.SIGINT, signal.SIGINT):
        try:
            proc.send_signal(sig)
        except ProcessLookupError:
            return
        time.sleep(0.5)
    try:
        proc.wait(timeout=30)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=10)


def _notebook_for_test(workdir: Path, default: Path = DEMO) -> Path:
    source = Path(os.environ.get("GRADWRIGHT_BROWSER_NOTEBOOK", default))
    target = workdir / source.name
    shutil.copy(source, target)
    return target


#: the ferry demo shows a mixed second derivative (once 1,785 px wide)
MIXED_DEMO = ROOT / "notebooks_demo" / "ferry_ticket_choice.ipynb"
#: blocks of our own whose layout went wrong in a browser once: a Kalman update whose scaled
#: trace was one 1,168 px line, and rule labels wrapped inside an equation or a word
LAYOUT_BLOCKS = {
    "kalman": (
        "%%derive P\nF: (m, m)\nP: (m, m) spd\nQ: (m, m) spd\nH: (q, m)\nR: (q, q) spd\n"
        "Pp = F @ P @ F.T + Q\nSg = H @ Pp @ H.T + R\nK = Pp @ H.T @ inv(Sg)\n"
        "Pn = Pp - K @ H @ Pp\nJ = trace(Pn)"
    ),
    "factorization": (
        "%%derive W H --no-check\nV: (m, n) positive\nW: (m, r)\nH: (r, n)\nR = V - W @ H\n"
        "loss = 0.5 * norm(R)**2 + 0.1 * sum(abs(W))"
    ),
    # the complex gradient's rule wrapped "left-" / "hand side" at its hyphen
    "beamformer": (
        "%%derive w --no-check\nR: (m, m) hpd\na: (m,) complex\nw: (m,) complex\n"
        "power = real(w.conj() @ R @ w) + 10 * abs(w.conj() @ a - 1)**2"
    ),
}


def _blocks_notebook(target: Path) -> Path:
    import nbformat
    from nbformat.v4 import new_code_cell, new_notebook

    cells = [new_code_cell("%load_ext gradwright")]
    cells += [new_code_cell(block) for block in LAYOUT_BLOCKS.values()]
    nb = new_notebook(cells=cells)
    nb.metadata["kernelspec"] = {
        "name": "python3",
        "display_name": "Python 3",
        "language": "python",
    }
    nbformat.write(nb, target)
    return target


@pytest.mark.parametrize(
    "demo",
    [DEMO, WIDE_DEMO, MIXED_DEMO, "blocks"],
    ids=["store-week", "robot-arm", "ferry", "layout-blocks"],
)
def test_demo_notebook_in_jupyterlab(tmp_path, demo):
    _ensure_chromium()
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    workdir = tmp_path / "root"
    workdir.mkdir()
    if demo == "blocks":
        notebook = _blocks_notebook(workdir / "layout_blocks.ipynb")
    else:
        notebook = _notebook_for_test(workdir, demo)
    settings_dir = tmp_path / "lab-settings"
    _write_settings(settings_dir)

    port = _free_port()
    token = "gradwright-browser-test"
    env = dict(os.environ)
    env.update(
        JUPYTERLAB_SETTINGS_DIR=str(settings_dir),
        JUPYTERLAB_WORKSPACES_DIR=str(tmp_path / "lab-workspaces"),
        JUPYTER_RUNTIME_DIR=str(tmp_path / "runtime"),
        PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT / "src"), env.get("PYTHONPATH")])),
        MPLBACKEND="Agg",
    )
    log = tmp_path / "jupyterlab.log"
    command = [
        sys.executable,
        "-m",
        "jupyterlab",
        "--no-browser",
        "--allow-root",
        "--ServerApp.ip=127.0.0.1",
        f"--ServerApp.port={port}",
        "--ServerApp.port_retries=0",
        f"--IdentityProvider.token={token}",
        f"--ServerApp.root_dir={workdir}",
        "--LabApp.expose_app_in_browser=True",
        "--LabApp.news_url=",
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
    ]
    started = time.monotonic()
    with open(log, "w") as log_file:
        proc = subprocess.Popen(
            command, cwd=workdir, env=env, stdout=log_file, stderr=subprocess.STDOUT
        )
    try:
        _wait_for_server(f"http://127.0.0.1:{port}/api/status?token={token}", proc, log)
        with sync_playwright() as pw:
            browser = pw.chromium.launch(
                executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_FLAGS
            )
            try:
                page = browser.new_page(viewport={"width": 1280, "height": 2400})
                try:
                    _run_notebook_and_click(page, port, token, notebook.name)
                    _check_layout(page, notebook.stem)
                except Exception:
                    # What the page looked like when it went wrong, for the test output.
                    page.screenshot(path=str(ARTIFACTS / "jupyterlab-failure.png"))
                    raise
            finally:
                browser.close()
    finally:
        _stop_server(proc)
    print(f"browser test took {time.monotonic() - started:.1f} s")


def _run_notebook_and_click(page, port: int, token: str, name: str) -> None:
    page.set_default_timeout(CELL_TIMEOUT_MS)
    page.goto(f"http://127.0.0.1:{port}/lab/tree/{name}?token={token}")
    page.wait_for_selector(".jp-Notebook", state="visible")
    page.wait_for_function("() => window.jupyterapp !== undefined")
    _wait_kernel_idle(page)

    page.evaluate("() => window.jupyterapp.shell.collapseLeft()")
    _start_run_all(page)
    # Typeset math (MathJax 3 renders into <mjx-container>) and the check panel's widgets.
    page.wait_for_selector("mjx-container", state="attached")
    status = page.locator(".gradwright-check-status").first
    status.wait_for(state="visible")
    _wait_kernel_idle(page)
    page.wait_for_function(
        """() => Array.from(document.querySelectorAll('.jp-InputArea-prompt'))
                  .every(p => !p.textContent.includes('*'))"""
    )
    errors = page.locator(".jp-RenderedText[data-mime-type='application/vnd.jupyter.stderr']")
    tracebacks = [t for t in errors.all_inner_texts() if "Traceback" in t or "Error" in t]
    assert not tracebacks, f"cells raised: {tracebacks[:2]}"

    before = status.inner_text()
    button = page.locator(".gradwright-check-run").first
    button.scroll_into_view_if_needed()
    button.click()
    page.wait_for_function(
        """([before]) => {
            const el = document.querySelector('.gradwright-check-status');
            return el && el.innerText !== before && !el.innerText.includes('running');
        }""",
        arg=[before],
    )
    after = status.inner_text()
    assert after != before
    assert "PASS" in after, after

    # Frame the derivation with its panel: the %%derive cell's output at the top.
    page.locator(".gradwright-check-panel img").first.wait_for(state="visible")
    page.evaluate(
        """() => {
            const math = document.querySelector('.jp-OutputArea-output mjx-container');
            const cell = math && math.closest('.jp-Cell');
            if (cell) cell.scrollIntoView({block: 'start'});
        }"""
    )
    page.wait_for_timeout(800)  # let the plot images and the math paint
    page.screenshot(path=str(ARTIFACTS / "jupyterlab-window.png"), full_page=False)
    shot = ARTIFACTS / "jupyterlab-check-panel.png"
    page.locator(".jp-Cell", has=page.locator(".gradwright-check-panel")).first.screenshot(
        path=str(shot)
    )
    if os.environ.get("GRADWRIGHT_UPDATE_SCREENSHOT") == "1":
        shutil.copy(shot, ROOT / "docs" / "screenshot.png")


def _check_layout(page, stem: str) -> None:
    """Nothing wider than the output: the derivation tables, their math and rule columns, the
    panels; the math typeset without MathJax errors; the rules wrap between words only."""
    page.wait_for_timeout(500)
    report = page.evaluate(
        r"""() => {
            const out = {over: [], merror: document.querySelectorAll('mjx-merror').length,
                         derivations: 0, widest: 0, rules: 0, brokenWords: [], outputWidth: 0};
            const outputs = document.querySelectorAll('.jp-OutputArea-output');
            for (const o of outputs) {
                const box = o.getBoundingClientRect();
                out.outputWidth = Math.max(out.outputWidth, box.width);
                const parts = o.querySelectorAll(
                    '.gradwright-derivation table, mjx-container, .gradwright-shapes table,' +
                    ' .gradwright-check-panel, .gradwright-rule, .gradwright-identity-panel');
                for (const el of parts) {
                    const r = el.getBoundingClientRect();
                    if (r.width > 0 && r.right > box.right + 1) {
                        out.over.push(el.className + ' ' + Math.round(r.right - box.left) +
                                      ' > ' + Math.round(box.width));
                    }
                }
                if (o.scrollWidth > o.clientWidth + 1) {
                    out.over.push('output scrolls: ' + o.scrollWidth + ' > ' + o.clientWidth);
                }
            }
            for (const t of document.querySelectorAll('.gradwright-derivation table')) {
                out.derivations += 1;
                out.widest = Math.max(out.widest, t.getBoundingClientRect().width);
            }
            for (const rule of document.querySelectorAll('.gradwright-rule')) {
                out.rules += 1;
                // a rule wraps between words: no word is split over two lines
                const range = document.createRange();
                for (const node of rule.childNodes) {
                    if (node.nodeType !== 3) continue;
                    const words = node.textContent.split(/(\s+)/);
                    let at = 0;
                    for (const w of words) {
                        if (w.trim().length > 1) {
                            range.setStart(node, at); range.setEnd(node, at + w.length);
                            if (range.getClientRects().length > 1) out.brokenWords.push(w);
                        }
                        at += w.length;
                    }
                }
            }
            return out;
        }"""
    )
    page.screenshot(path=str(ARTIFACTS / f"jupyterlab-layout-{stem}.png"), full_page=True)
    print(f"layout of {stem}: {report}")
    assert report["merror"] == 0, f"MathJax errors: {report['merror']}"
    assert report["derivations"] >= 1 and report["rules"] >= 1, report
    assert not report["over"], report["over"][:5]
    assert report["widest"] <= OUTPUT_WIDTH, report
    assert not report["brokenWords"], report["brokenWords"][:5]


def _accept_dialogs(page) -> None:
    """Accept a dialog JupyterLab may raise on opening (e.g. "Select Kernel", preselected)."""
    accept = page.locator(".jp-Dialog button.jp-mod-accept")
    if accept.count():
        accept.first.click()


def _start_run_all(page) -> None:
    # Not awaited: the command's promise only settles once every cell has run.
    page.evaluate("() => { window.jupyterapp.commands.execute('notebook:run-all-cells'); }")
    deadline = time.monotonic() + CELL_TIMEOUT_MS / 1000
    while time.monotonic() < deadline:
        _accept_dialogs(page)
        started = page.evaluate(
            """() => Array.from(document.querySelectorAll('.jp-InputArea-prompt'))
                      .some(p => /\\[(\\*|\\d+)\\]/.test(p.textContent))"""
        )
        if started:
            return
        page.wait_for_timeout(500)
    raise AssertionError("JupyterLab did not start running the cells")


def _wait_kernel_idle(page) -> None:
    # Ask the notebook's session itself: a status bar reading "No Kernel | Idle" is not ready.
    page.wait_for_function(
        """() => {
            const widget = window.jupyterapp.shell.currentWidget;
            const session = widget && widget.sessionContext && widget.sessionContext.session;
            const kernel = session && session.kernel;
            return !!kernel && kernel.status === 'idle' && kernel.connectionStatus === 'connected';
        }"""
    )
