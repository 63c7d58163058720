"""JupyterLab in Chromium for the notebook browser tests: open a notebook in a workspace of
its own, drive it (run all, tabs, kernel code), shut its kernels down afterwards.

Each module opens its notebook in its own, reset JupyterLab workspace: a notebook left open
by an earlier module would otherwise be restored beside it and hide the new desk.
"""

from __future__ import annotations

import json
import urllib.request
from collections.abc import Iterator
from typing import Any

from playwright.sync_api import TimeoutError as PlaywrightTimeout

TIMEOUT = 90_000  # ms, for steps that run the notebook

KERNEL_EXEC = """async (code) => {
  const k = window.jupyterapp.shell.currentWidget.sessionContext.session.kernel;
  const f = k.requestExecute({code: code, silent: false, store_history: false});
  let out = '';
  f.onIOPub = (msg) => { if (msg.header.msg_type === 'stream') out += msg.content.text;
                         if (msg.header.msg_type === 'error') out += 'ERROR ' + msg.content.evalue; };
  await f.done;
  return out;
}"""

KERNEL_IDLE = """() => {
  const w = window.jupyterapp.shell.currentWidget;
  return !!(w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel
            && w.sessionContext.session.kernel.status === 'idle');
}"""

ALL_RUN = """() => {
  const w = window.jupyterapp.shell.currentWidget;
  if (!w || !w.sessionContext || !w.sessionContext.session || !w.sessionContext.session.kernel) return false;
  if (w.sessionContext.session.kernel.status !== 'idle') return false;
  const prompts = [...document.querySelectorAll('.jp-CodeCell .jp-InputPrompt')].map(p => p.textContent);
  return prompts.length > 0 && prompts.every(t => /\\[\\d+\\]/.test(t));
}"""


class Notebook:
    def __init__(self, page, lab):
        self.page, self.lab = page, lab

    def py(self, code: str) -> str:
        return self.page.evaluate(KERNEL_EXEC, code)

    def run_all(self) -> None:
        self.page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
        # wait until this run started (a prompt shows [*]) then until every cell has a number
        try:
            self.page.wait_for_function(
                "() => [...document.querySelectorAll('.jp-CodeCell .jp-InputPrompt')]"
                ".some(p => p.textContent.includes('*'))", timeout=10_000)
        except PlaywrightTimeout:  # a very fast run may finish before we look
            pass
        self.page.wait_for_function(ALL_RUN, timeout=TIMEOUT)
        self.page.wait_for_selector(".modalnb-desk", timeout=TIMEOUT)

    def tab(self, name: str) -> None:
        self.page.locator(".modalnb-desk-tabs .lm-TabBar-tab", has_text=name).click()

    def text(self, selector: str) -> str:
        return self.page.locator(selector).first.text_content() or ""

    def errors(self) -> list[str]:
        return self.page.evaluate("""() => [
          ...document.querySelectorAll('.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.stderr"]'),
          ...document.querySelectorAll('.modalnb-error')].map(e => e.textContent)
          .concat(document.body.innerText.includes('Error displaying widget') ? ['widget error'] : [])""")


def open_notebook(lab: dict[str, Any], browser: Any, name: str, workspace: str) -> Any:
    """A new page with notebook `name` of the lab's folder open in workspace `workspace`
    (reset), its kernel idle."""
    page = browser.new_page()
    page.goto(f"{lab['url']}/lab/workspaces/{workspace}/tree/{name}?token={lab['token']}&reset")
    page.wait_for_function("() => !!window.jupyterapp", timeout=TIMEOUT)
    page.wait_for_function(KERNEL_IDLE, timeout=TIMEOUT)
    return page


def shut_down_sessions(lab: dict[str, Any], path_ending: str = "") -> None:
    """Kernels outlive their page: delete the lab's sessions (those whose path ends so)."""
    req = urllib.request.Request(f"{lab['url']}/api/sessions?token={lab['token']}")
    with urllib.request.urlopen(req, timeout=10) as r:
        sessions = json.load(r)
    for s in sessions:
        if s.get("path", "").endswith(path_ending):
            urllib.request.urlopen(urllib.request.Request(
                f"{lab['url']}/api/sessions/{s['id']}?token={lab['token']}", method="DELETE"), timeout=10)


def notebook_page(lab: dict[str, Any], browser: Any, name: str, workspace: str) -> Iterator[Notebook]:
    """Body of a module fixture: the open notebook, then its kernels shut down and the page closed."""
    page = open_notebook(lab, browser, name, workspace)
    try:
        yield Notebook(page, lab)
    finally:
        shut_down_sessions(lab, name)
        page.close()
