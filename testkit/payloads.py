"""Hostile text for the tests that check outside text stays text (links, files, notes)."""

#: Payloads: tags, event attributes, javascript: and data: URLs, SVG and MathML, Markdown
#: links and images, template syntax, comment and CDATA breakers, Unicode tricks, long text.
PAYLOADS = [
    "<script>alert(1)</script>",
    "<img src=x onerror=alert(1)>",
    '"><img src=x onerror=alert(2)>',
    "'><svg onload=alert(3)>",
    "<svg><script>alert(4)</script></svg>",
    "<iframe srcdoc='<script>alert(5)</script>'></iframe>",
    '<a href="javascript:alert(6)">click</a>',
    "javascript:alert(7)",
    "data:text/html,<script>alert(8)</script>",
    "[link](javascript:alert(9))",
    "![img](x onerror=alert(10))",
    "<math><mtext><script>alert(11)</script></mtext></math>",
    "<body onload=alert(12)>",
    "<details open ontoggle=alert(13)>x</details>",
    "<input autofocus onfocus=alert(14)>",
    "<marquee onstart=alert(15)>x</marquee>",
    "<video><source onerror=alert(16)></video>",
    "<object data=javascript:alert(17)></object>",
    "<base href=//evil.invalid/>",
    "<meta http-equiv=refresh content=0;url=//evil.invalid>",
    "<style>*{display:none}</style>",
    "</script><script>alert(18)</script>",
    "<scr<script>ipt>alert(19)</script>",
    "{{7*7}}${alert(20)}",
    "<!--<img src=x onerror=alert(21)>-->",
    "]]><script>alert(22)</script>",
    "\u202e<img src=x onerror=alert(23)>",
    "\u200b<svg/onload=alert(24)>\u200b",
    "\uff1cscript\uff1ealert(25)\uff1c/script\uff1e",
    "%3Cscript%3Ealert(26)%3C%2Fscript%3E",
    "&lt;img src=x onerror=alert(27)&gt;",
    "<img src=x onerror=alert(28)>" + "A" * 3000,
    '<div style="position:fixed;inset:0;background:red">covered</div>',
    "<form action=//evil.invalid><input name=q></form>",
]

#: elements and attributes that would mean a payload became markup (scripts run by
#: Bokeh itself are allowed, so "script" is not among them)
INJECTED = (
    "iframe",
    "marquee",
    "object",
    "video",
    "form",
    "math",
    "[onerror]",
    "[onload]",
    "[ontoggle]",
    "[onfocus]",
    "[onstart]",
    "a[href^=javascript]",
)


def injected(page) -> list[str]:
    """The selectors of :data:`INJECTED` that match something on a Playwright page."""
    return [sel for sel in INJECTED if page.locator(sel).count()]
