"""The room's bar tells the one who steered that someone took over (and no one else)."""

from app.desk.room import RoomBar


def _snap(steering, following):
    people = [
        {"key": k, "name": k.title(), "steering": k == steering, "following": k in following}
        for k in ("ana", "ben", "cy")
    ]
    return {"people": people, "view": None}


def _status(bar):
    return bar.status.object


def test_the_one_who_steered_is_told_who_took_over_until_they_look_on_their_own():
    ana, cy = RoomBar("Room", "Ana", True), RoomBar("Room", "Cy", True)
    first = _snap("ana", {"ben", "cy"})
    ana.show(first, "ana")
    cy.show(first, "cy")
    assert "You steer the room" in _status(ana)
    taken = _snap("ben", {"ana", "cy"})
    ana.show(taken, "ana")
    cy.show(taken, "cy")
    assert "Ben took over the steering from you. You follow Ben." in _status(ana)
    # a follower who never steered is not told so
    assert "took over" not in _status(cy) and "You follow Ben." in _status(cy)
    # it is still said when the page is drawn again from the same snapshot
    ana.show(taken, "ana", fresh=False)
    assert "took over the steering from you" in _status(ana)
    # ... and no longer once she looks on her own and comes back
    ana.show(_snap("ben", {"cy"}), "ana")
    assert "on your own" in _status(ana)
    ana.show(taken, "ana")
    assert "took over" not in _status(ana) and "You follow Ben." in _status(ana)
