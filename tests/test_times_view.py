"""The view through the valid times: times written as the page writes them, a verdict at
each time (and "no verdict" where the region could not be judged)."""

from app.desk.below import Below, verdicts_html
from app.state import ViewState

SERIES = [
    {
        "time": "2041-01-19T00:00:00Z",
        "rossby_local": 0.1,
        "ageostrophic_fraction": 0.05,
        "balance": "geostrophic",
    },
    {
        "time": "2041-01-19T06:00:00Z",
        "rossby_local": 0.4,
        "ageostrophic_fraction": 0.3,
        "balance": "gradient",
    },
    {
        "time": "2041-01-19T12:00:00Z",
        "rossby_local": None,
        "ageostrophic_fraction": None,
        "balance": None,
    },
]


def test_each_time_has_its_verdict_in_order():
    html = verdicts_html(SERIES)
    at = [html.index(t) for t in ("19 Jan 00 UTC", "19 Jan 06 UTC", "19 Jan 12 UTC")]
    assert at == sorted(at)
    assert html.index("Geostrophic") < html.index("Gradient") < html.index("no verdict")


def test_the_times_axis_writes_day_month_and_hour_in_utc():
    below = Below(ViewState())
    below.tabs.active = list(below.TAB).index("times")  # its parts are given when open
    below.show_times({"series": SERIES, "current": SERIES[0]["time"], "level_hpa": 500.0})
    fmt = below.times_fig.xaxis[0].formatter
    assert fmt.hours == fmt.days == "%d %b %H UTC"
    assert fmt.context is None  # no second line in another format under the ticks
    assert below.times_src.data["verdict"] == ["Geostrophic", "Gradient", "no verdict"]
    assert "no verdict" in below.times_verdicts.object
