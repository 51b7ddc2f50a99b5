"""A crawler for the browser sweep (test_no_eval.py): it opens pages, triggers their htmx
interactions and records everything the browser reports against them.

Every problem is kept with the step that caused it, so one run lists every defect: a
console error, an uncaught exception (``pageerror``), a refused script or style (the
``securitypolicyviolation`` event, W3C Content Security Policy Level 3, section 5.3) and
any answer of 500 or more to a request the page made.
"""

from __future__ import annotations

import time
from collections import Counter, deque
from urllib.parse import urljoin, urlsplit

from django.urls import Resolver404, resolve

# Added before any page script runs (through the DevTools protocol, outside the policy):
# every violation is handed to Python at once, so none is lost when the page navigates.
LISTEN = """
document.addEventListener("securitypolicyviolation", (event) => {
  window.batonViolation(
    event.violatedDirective + " refused " + (event.blockedURI || "inline") +
    " at " + (event.sourceFile || "") + ":" + event.lineNumber + " (" +
    (event.sample || "") + ")"
  );
});
"""

# Pages that answer with a file, not a page: no script runs in them.
DOWNLOAD_NAMES = frozenset(
    {
        "study-download",
        "plan-analysis-download",
        "plan-export",
        "study-history-csv",
        "study-history-json",
    }
)
# The global pages a study's pages link to.
GLOBAL_NAMES = frozenset({"study-list", "methods"})


def url_name(url: str) -> tuple[str | None, dict]:
    """The URL name and arguments of one of Baton's addresses (``None`` for others)."""
    try:
        match = resolve(urlsplit(url).path)
    except Resolver404:
        return None, {}
    return match.url_name, match.kwargs


class Sweep:
    """Drives one signed-in page and keeps what the browser reports."""

    def __init__(self, page, base: str, studies: set[int]):
        self.page = page
        self.base = base
        self.studies = studies
        self.step = "start"
        self.problems: list[str] = []
        self.pages: set[str] = set()  # addresses opened by navigation
        self.interactions = 0
        self.answered: Counter[str] = Counter()  # URL name -> requests answered below 500
        self.statuses: dict[str, Counter[int]] = {}  # URL name -> status -> count
        self.posts: list[str] = []
        self.pending = 0
        page.set_default_timeout(10_000)
        page.expose_function("batonViolation", self._violation)
        page.add_init_script(LISTEN)
        page.on("console", self._console)
        page.on("pageerror", lambda error: self._problem(f"page error: {error}"))
        page.on("request", self._request)
        page.on("requestfinished", self._done)
        page.on("requestfailed", self._done)
        page.on("response", self._response)
        # hx-confirm asks with window.confirm; a sweep step that must go through accepts.
        self.accept_dialogs = False
        page.on("dialog", lambda d: d.accept() if self.accept_dialogs else d.dismiss())

    # -- what the browser reports ---------------------------------------------------------

    def _problem(self, text: str) -> None:
        self.problems.append(f"[{self.step}] {text}")

    def _violation(self, text: str) -> None:
        self._problem(f"security policy violation: {text}")

    def _console(self, message) -> None:
        text = message.text
        if message.type == "error" or "Content Security Policy" in text or "Refused to" in text:
            self._problem(f"console {message.type}: {text}")

    def _request(self, request) -> None:
        self.pending += 1
        if request.method == "POST":
            self.posts.append(urlsplit(request.url).path)

    def _done(self, _request) -> None:
        self.pending = max(0, self.pending - 1)

    def _response(self, response) -> None:
        if not response.url.startswith(self.base):
            return
        name, _ = url_name(response.url)
        if response.status >= 500:
            self._problem(f"{response.request.method} {response.url} answered {response.status}")
        elif name:
            self.answered[name] += 1
            self.statuses.setdefault(name, Counter())[response.status] += 1
        if "text/html" in response.headers.get("content-type", ""):
            policy = response.headers.get("content-security-policy", "")
            if "script-src 'self'" not in policy or "unsafe-eval" in policy:
                self._problem(f"{response.url} has the policy {policy!r}")

    # -- driving the page ------------------------------------------------------------------

    def settle(self, quiet: int = 3, limit: float = 20.0) -> None:
        """Wait until no request has been in flight for ``quiet`` polls of 50 ms (htmx
        swaps, then charts.js fetches plotly and draws)."""
        deadline = time.monotonic() + limit
        calm = 0
        while calm < quiet and time.monotonic() < deadline:
            self.page.wait_for_timeout(50)
            calm = calm + 1 if self.pending == 0 else 0

    def open(self, url: str, step: str | None = None) -> bool:
        """Open an address; ``False`` when it did not answer with a page."""
        if not url.startswith("http"):
            url = self.base + url
        self.step = step or f"open {url.removeprefix(self.base)}"
        try:
            response = self.page.goto(url)
        except Exception as error:  # noqa: BLE001 - a failed load is a finding
            self._problem(f"could not open {url}: {error}")
            return False
        self.settle()
        self.pages.add(self.page.url.removeprefix(self.base))
        if response is None or response.status >= 400:
            self._problem(f"{url} answered {response and response.status}")
            return False
        if self.page.evaluate("window.htmx && window.htmx.config.allowEval") is not False:
            self._problem("htmx may evaluate strings (htmx.config.allowEval is not false)")
        return True

    def act(self, step: str, action) -> None:
        """Run one interaction and wait for what it started."""
        self.step = step
        self.interactions += 1
        try:
            action()
        except Exception as error:  # noqa: BLE001 - an interaction that fails is a finding
            self._problem(f"the interaction failed: {str(error).splitlines()[0]}")
        self.settle()

    def reveal(self, locator) -> None:
        """Open the closed ``<details>`` around an element so a person could click it."""
        locator.evaluate(
            """el => { for (let d = el.closest('details'); d;
                            d = d.parentElement.closest('details')) d.open = true; }"""
        )

    # -- where to go next ------------------------------------------------------------------

    def allowed(self, url: str) -> bool:
        """Same origin, a page (not a download), of a swept study or a global page."""
        if not url.startswith(self.base):
            return False
        name, kwargs = url_name(url)
        if name is None or name in DOWNLOAD_NAMES:
            return False
        if name in GLOBAL_NAMES:
            return True
        return kwargs.get("pk") in self.studies

    def links(self) -> list[str]:
        hrefs = self.page.eval_on_selector_all(
            "a[href]:not([download])", "links => links.map(a => a.href.split('#')[0])"
        )
        return [href for href in hrefs if self.allowed(href)]

    def crawl(self, starts: list[str], per_name: int) -> None:
        """Breadth first over links from ``starts``, opening at most ``per_name`` addresses
        of each URL name in each study (in the order they are found, so the sample is
        the same every run), and triggering the htmx interactions of the first page of
        each URL name in each study."""
        queue = deque(self.base + s if s.startswith("/") else s for s in starts)
        queued = set(queue)
        taken: Counter[tuple] = Counter()
        for url in queue:
            name, kwargs = url_name(url)
            taken[(name, kwargs.get("pk"))] += 1
        explored: set[tuple] = set()
        while queue:
            url = queue.popleft()
            if not self.open(url):
                continue
            name, kwargs = url_name(url)
            group = (name, kwargs.get("pk"))
            found = self.links()
            if group not in explored:
                explored.add(group)
                found += self.interact(url)
            for link in found:
                link_name, link_kwargs = url_name(link)
                key = (link_name, link_kwargs.get("pk"))
                if link in queued or taken[key] >= per_name:
                    continue
                taken[key] += 1
                queued.add(link)
                queue.append(link)

    # -- htmx interactions -----------------------------------------------------------------

    # Elements that fetch with GET when a person acts on them (not polling: that runs by
    # itself while the page is open).
    TRIGGERS = "[hx-get]:not([hx-trigger^='every']):not([hx-trigger^='load'])"

    def _triggers(self) -> list[dict]:
        return self.page.eval_on_selector_all(
            self.TRIGGERS,
            """els => els.map((el, index) => ({
                 index, tag: el.tagName.toLowerCase(), url: el.getAttribute('hx-get'),
                 target: el.getAttribute('hx-target') || '',
                 trigger: el.getAttribute('hx-trigger') || '' }))""",
        )

    def interact(self, url: str, limit: int = 12) -> list[str]:
        """Trigger each kind of htmx GET interaction on the page at ``url`` once (a kind is
        the URL name it asks for, the element it swaps and the element's tag), including
        the ones that appear after an earlier one (an edit form's Cancel, the next step),
        then submit its plain GET forms. Returns the links found on the way."""
        done: set[tuple] = set()
        found: list[str] = []
        for _ in range(limit):
            trigger = next(
                (
                    t
                    for t in self._triggers()
                    if self._kind(t) not in done and self.allowed(urljoin(self.page.url, t["url"]))
                ),
                None,
            )
            if trigger is None:
                break
            done.add(self._kind(trigger))
            element = self.page.locator(self.TRIGGERS).nth(trigger["index"])
            label = f"htmx {trigger['tag']} {trigger['url']} on {url.removeprefix(self.base)}"
            self.act(label, lambda element=element, trigger=trigger: self._fire(element, trigger))
            found += self.links()
        for index in range(self.page.locator("form[method=get]:not([hx-get])").count()):
            if self.page.url != url:
                self.open(url)
            form = self.page.locator("form[method=get]:not([hx-get])").nth(index)
            self.act(
                f"GET form {index} on {url.removeprefix(self.base)}", lambda f=form: self.submit(f)
            )
            self.pages.add(self.page.url.removeprefix(self.base))
            found += self.links()
        return found

    def _kind(self, trigger: dict) -> tuple:
        name, _ = url_name(self.base + urlsplit(trigger["url"]).path)
        return (name, trigger["target"], trigger["tag"])

    def _fire(self, element, trigger: dict) -> None:
        self.reveal(element)
        if trigger["tag"] == "form":
            self.submit(element, change=True)
        else:
            element.click()

    def submit(self, form, change: bool = True) -> None:
        """Submit a reading form as a person would: each of its menus moved to its next
        choice (a filter changed), then its submit button."""
        if change:
            for index in range(form.locator("select:not([disabled])").count()):
                select = form.locator("select:not([disabled])").nth(index)
                values = select.evaluate("s => Array.from(s.options).map(o => o.value)")
                if len(values) > 1:
                    current = select.evaluate("s => s.selectedIndex")
                    select.select_option(values[(current + 1) % len(values)])
                    self.settle()
        button = form.locator("button[type=submit], button:not([type]), input[type=submit]")
        if button.count():
            button.first.click()
        else:
            form.evaluate("f => f.requestSubmit()")
