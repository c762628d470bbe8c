"""What people type is read by one set of rules, whether typed on the command line, in a
batch's boxes file or in the page (app/inputs.py)."""

import subprocess
import sys

import pytest

from app.inputs import InputError, parse_box, parse_level, parse_levels, parse_member


@pytest.mark.parametrize(
    "text, ok",
    [
        ("10,40,30,50", True),
        ("170,-170,30,50", True),  # across the date line
        ("-180,180,-90,90", True),  # the whole circle
        ("10,10,40,50", False),  # no width
        ("10,40,50,30", False),  # south north of north
        ("10,40,30", False),  # three numbers
        ("10,400,30,50", False),  # beyond 360
        ("10,nan,30,50", False),
        ("a,b,c,d", False),
    ],
)
def test_one_rule_for_a_box_everywhere(text, ok, tmp_path, capsys):
    from app.batch import BatchError, read_boxes
    from app.cli import main
    from app.state import parse_box as page_box

    if ok:
        assert parse_box(text) == [float(v) for v in text.split(",")]
    else:
        with pytest.raises(InputError):
            parse_box(text)
    # the page's link and typed fields
    assert (page_box(text.split(",")) is not None) == ok
    # a batch's boxes file
    f = tmp_path / "boxes.yaml"
    f.write_text(f"b: [{text}]\n")
    if ok:
        assert read_boxes(str(f))[0][1] == tuple(float(v) for v in text.split(","))
    else:
        with pytest.raises(BatchError):
            read_boxes(str(f))
    # the command line (a box that parses but has no points of the case is the case's
    # sentence, not the parser's)
    code = main(["analyze", "nofile.nc", "--level", "500", f"--box={text}"])
    err = capsys.readouterr().err
    assert code == 2 and (("--box:" in err) != ok), err


def test_levels_and_members():
    assert parse_level("500") == 500.0 and parse_level("MSL") == "msl"
    assert parse_level("sea level") == "msl"
    assert parse_levels("850, 500,msl") == [850.0, 500.0, "msl"]
    for bad in ("0", "1200", "abc", ""):
        with pytest.raises(InputError):
            parse_level(bad)
    assert parse_member("3") == 3 and parse_member("Mean") == "mean"
    assert parse_member("all", allow_all=True) == "all"
    for bad in ("-1", "first", "all"):
        with pytest.raises(InputError):
            parse_member(bad)


def test_no_import_circle_and_the_rooms_commands_need_no_page():
    # the batch no longer borrows the command line's private parser; making a room's link
    # loads neither Panel nor Bokeh
    code = (
        "import sys; import app.batch; assert 'app.cli' not in sys.modules; "
        "from app.rooms.share import room_link; room_link('http://x', 'k'); "
        "import app.cli; assert 'panel' not in sys.modules and 'bokeh' not in sys.modules"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
