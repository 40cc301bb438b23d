"""Tests of ptype.roads.alerts: rules, lifecycle decisions and the lifecycle through the service."""

from datetime import timedelta

import pytest
from ptype.api import create_app
from ptype.api.sites import store_for
from series_helpers import T0, profile_doc, storm_docs

from ptype.roads.alerts.lifecycle import CHANGE_TOLERANCE, decide
from ptype.roads.alerts.rules import Candidate, certainty_word, evaluate_rules, urgency_word
from ptype.store import keys

NOW = T0


def _step(minutes, *, ptype="RA", fz=0.0, acc=0.0, frost=False, snow_p=0.0, rate=1.0,
          road=1.0, snow_cm=0.0, glaze=0.0, pl_p=0.0, pl_cm=0.0):
    t = NOW + timedelta(minutes=minutes)
    return {"valid_time": t.strftime("%Y-%m-%dT%H:%M:%SZ"), "lead_hours": minutes / 60,
            "ptype": ptype,
            "hazards": {"freezing_probability": fz, "ice_accretion_mm": acc, "frost": frost,
                        "snow_probability": snow_p, "snow_cm": snow_cm, "flat_glaze_mm": glaze,
                        "freezing_on_road": fz >= 0.5, "snow": snow_p >= 0.5,
                        "ice_pellets": pl_p >= 0.5, "ice_pellets_probability": pl_p,
                        "ice_pellets_cm": pl_cm},
            "surface": {"precipitation_rate_mm_h": rate, "road_surface_temperature_c": road}}


def _timeline(steps):
    return {"steps": steps, "step_minutes": 60}


# --- rules -------------------------------------------------------------------------------

def test_evaluate_rules_freezing_within_window():
    steps = [_step(0), _step(60, ptype="FZRA", fz=0.35), _step(120, ptype="FZRA", fz=0.8),
             _step(180)]
    (c,) = [c for c in evaluate_rules(_timeline(steps), NOW, "X") if
            c.event == "freezing_precipitation"]
    assert c.onset == NOW + timedelta(hours=1) and c.expires == NOW + timedelta(hours=3)
    assert c.certainty == "Likely" and c.severity == "Severe"
    assert c.parameters["grib2_code"] == 3  # GRIB2 4.201: freezing rain
    assert "Guidance only" in c.description and "Guidance only" in c.instruction


def test_evaluate_rules_freezing_beyond_window_or_below_threshold():
    late = [_step(0), _step(7 * 60, ptype="FZRA", fz=0.9)]
    assert not [c for c in evaluate_rules(_timeline(late), NOW, "X")
                if c.event == "freezing_precipitation"]
    weak = [_step(0, ptype="FZRA", fz=0.29)]
    assert not evaluate_rules(_timeline(weak), NOW, "X")
    # A site threshold overrides the default 0.3.
    mid = [_step(0, ptype="FZRA", fz=0.4)]
    assert evaluate_rules(_timeline(mid), NOW, "X")
    assert not evaluate_rules(_timeline(mid), NOW, "X", {"freezing_probability": 0.5})


def test_evaluate_rules_accretion_total_and_severity():
    steps = [_step(h * 60, ptype="FZRA", fz=0.2, acc=0.7) for h in range(4)]  # 2.8 mm
    (c,) = [c for c in evaluate_rules(_timeline(steps), NOW, "X") if c.event == "ice_accretion"]
    assert c.severity == "Moderate" and c.parameters["ice_accretion_mm"] == pytest.approx(2.8)
    steps = [_step(h * 60, ptype="FZRA", fz=0.2, acc=2.0) for h in range(4)]  # 8 mm
    (c,) = [c for c in evaluate_rules(_timeline(steps), NOW, "X") if c.event == "ice_accretion"]
    assert c.severity == "Severe"  # >= 6.35 mm (a quarter inch; from memory)
    few = [_step(0, ptype="FZRA", acc=1.9)]
    assert not [c for c in evaluate_rules(_timeline(few), NOW, "X") if c.event == "ice_accretion"]


def test_evaluate_rules_frost_and_heavy_snow():
    steps = [_step(0, frost=True, road=-2.0, rate=0.0, ptype="NONE"),
             _step(60, ptype="SN", snow_p=0.9, rate=2.0, snow_cm=2.0)]
    events = {c.event: c for c in evaluate_rules(_timeline(steps), NOW, "X")}
    assert set(events) == {"frost", "heavy_snow"}
    assert events["frost"].parameters["grib2_code"] == 0
    assert not [c for c in evaluate_rules(_timeline(steps), NOW, "X", {"frost": False})
                if c.event == "frost"]


def test_evaluate_rules_ice_pellets_alert_and_severity():
    # Ice pellets make untreated roads slippery: an alert of their own, severity by the depth
    # over the period (ours: Minor < 0.5 cm <= Moderate < 2.5 cm <= Severe).
    steps = [_step(60 * h, ptype="PL", pl_p=0.7, pl_cm=0.3) for h in range(3)]
    (cand,) = [c for c in evaluate_rules(_timeline(steps), NOW, "Test Hill")
               if c.event == "ice_pellets"]
    assert cand.severity == "Moderate" and cand.parameters["ice_pellets_cm"] == 0.9
    assert cand.certainty == "Likely" and "Ice pellets on roads" in cand.headline
    deep = [_step(60 * h, ptype="PL", pl_p=0.7, pl_cm=1.0) for h in range(3)]
    assert [c.severity for c in evaluate_rules(_timeline(deep), NOW, "T")
            if c.event == "ice_pellets"] == ["Severe"]
    unlikely = [_step(60 * h, ptype="RA", pl_p=0.2, pl_cm=0.0) for h in range(3)]
    assert not [c for c in evaluate_rules(_timeline(unlikely), NOW, "T")
                if c.event == "ice_pellets"]
    late = [_step(60 * h, ptype="PL", pl_p=0.9, pl_cm=0.5) for h in (7, 8)]
    assert not [c for c in evaluate_rules(_timeline(late), NOW, "T") if c.event == "ice_pellets"]


def test_certainty_and_urgency_words():
    # OASIS CAP 1.2 sec. 3.2.2: Likely p > ~50 %, Possible p <= ~50 %; Immediate / Expected
    # (within the next hour) / Future.
    assert certainty_word(0.51) == "Likely" and certainty_word(0.5) == "Possible"
    assert urgency_word(NOW, NOW) == "Immediate"
    assert urgency_word(NOW + timedelta(minutes=45), NOW) == "Expected"
    assert urgency_word(NOW + timedelta(hours=3), NOW) == "Future"


# --- lifecycle ---------------------------------------------------------------------------

def _cand(event="frost", onset_h=1.0, expires_h=4.0, severity="Minor", certainty="Likely"):
    return Candidate(event, NOW + timedelta(hours=onset_h), NOW + timedelta(hours=expires_h),
                     severity, certainty, "Future", "h", "d", "i", {})


def _active(event="frost", onset_h=1.0, expires_h=4.0, severity="Minor", certainty="Likely"):
    return {"id": f"id-{event}", "event": event, "onset": NOW + timedelta(hours=onset_h),
            "expires": NOW + timedelta(hours=expires_h), "severity": severity,
            "certainty": certainty}


def test_decide_new_update_cancel_expire():
    assert [a.kind for a in decide([], [_cand()], NOW)] == ["new"]
    assert decide([_active()], [_cand(onset_h=1.2)], NOW) == []  # within tolerance
    assert [a.kind for a in decide([_active()], [_cand(onset_h=2.0)], NOW)] == ["update"]
    assert [a.kind for a in decide([_active()], [_cand(severity="Moderate")], NOW)] == ["update"]
    assert [a.kind for a in decide([_active()], [], NOW)] == ["cancel"]
    expired = _active(onset_h=-5, expires_h=-1)
    assert [a.kind for a in decide([expired], [], NOW)] == ["expire"]
    # An expired alert's hazard returning later is a new alert.
    assert sorted(a.kind for a in decide([expired], [_cand()], NOW)) == ["expire", "new"]


def test_decide_ongoing_alert_keeps_onset():
    started = _active(onset_h=-2, expires_h=3)
    cand = _cand(onset_h=0, expires_h=3)  # a timeline starting "now" begins at now
    assert decide([started], [cand], NOW) == []
    assert cand.onset == started["onset"]
    assert CHANGE_TOLERANCE == timedelta(minutes=30)


# --- through the service and the store -----------------------------------------------------

def _service_with_site(tmp_path, **config):
    """The service on a fresh store at 2026-01-27 00 UTC (5 members per alert evaluation), an
    API key's headers and a new site: ``(app, client, headers, site_id)``."""
    app = create_app({"PTYPE_DATA_DIR": str(tmp_path), "TESTING": True,
                      "PTYPE_NOW": "2026-01-27T00:00:00Z", "PTYPE_ALERT_MEMBERS": 5, **config})
    client = app.test_client()
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, "t", NOW)
    h = {"Authorization": f"Bearer {key}"}
    site = client.post("/v1/sites", json={"name": "Test Hill", "latitude": 47.1,
                                          "longitude": -33.2}, headers=h).json["id"]
    return app, client, h, site


def test_alert_lifecycle_alert_update_cancel_with_references(tmp_path):
    app, client, h, site = _service_with_site(tmp_path)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs(),
                                                    "issued_time": "2026-01-27T00:00:00Z"},
                headers=h)

    def fz():
        return [a for a in client.get("/v1/alerts").json["alerts"]
                if a["event"] == "freezing_precipitation"]
    (first,) = fz()
    assert first["msg_type"] == "Alert"
    # A later issue brings the freezing rain two hours later: an Update.
    later = storm_docs()
    delayed = [profile_doc(T0 + timedelta(hours=h_), sfc_c=s, nose_c=n, rate=r, road=rd)
               for h_, n, s, r, rd in [(0, 0, -3, 1.0, -2), (2, 0, -3, 1.5, -2),
                                       (4, 12, -3, 1.5, -2), (6, 18, -2, 2.0, -1.5)]]
    assert later != delayed
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": delayed,
                                                    "issued_time": "2026-01-27T01:00:00Z"},
                headers=h)
    (upd,) = fz()
    assert upd["id"] == first["id"] and upd["msg_type"] == "Update"
    assert upd["onset"] > first["onset"] and len(upd["references"]) == 1
    # Then an all-snow issue: the hazard leaves the forecast, the alert is cancelled.
    snow = [profile_doc(T0 + timedelta(hours=h_), nose_c=0, rate=1.0) for h_ in (0, 3, 6)]
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": snow,
                                                    "issued_time": "2026-01-27T02:00:00Z"},
                headers=h)
    (gone,) = fz()
    assert gone["status"] == "cancelled" and gone["msg_type"] == "Cancel"
    assert len(gone["references"]) == 2
    assert gone["references"][0].split(",")[1] == f"{first['id']}.1"
    cap = client.get(f"/v1/alerts/{gone['id']}.cap").get_data(as_text=True)
    assert "<msgType>Cancel</msgType>" in cap and "<references>" in cap
    active_only = client.get("/v1/alerts?active=1").json["alerts"]
    assert gone["id"] not in {a["id"] for a in active_only}
    store_for(app).dispose()


def test_alerts_expire_with_the_clock(tmp_path):
    app, client, h, site = _service_with_site(tmp_path)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs()}, headers=h)
    alerts = client.get("/v1/alerts").json["alerts"]
    assert alerts and all(a["status"] == "active" for a in alerts)
    app.config["PTYPE_NOW"] = "2026-01-28T00:00:00Z"  # a day later: all have expired
    later = client.get("/v1/alerts").json["alerts"]
    assert later and {a["status"] for a in later} == {"expired"}
    store_for(app).dispose()


def test_observed_present_weather_makes_certainty_observed():
    from ptype.roads.alerts.rules import observed_confirms
    # METAR w'w' groups (WMO code table 4678): intensity ignored for freezing types.
    assert observed_confirms("freezing_precipitation", "-FZRA BR")
    assert observed_confirms("freezing_precipitation", "FZDZ")
    assert not observed_confirms("freezing_precipitation", "RA")
    assert observed_confirms("heavy_snow", "+SN") and not observed_confirms("heavy_snow", "-SN")
    steps = [_step(0, ptype="FZRA", fz=0.6), _step(60, ptype="FZRA", fz=0.6)]
    tl = {**_timeline(steps), "observation": {"present_weather": "-FZRA"}}
    (c,) = [c for c in evaluate_rules(tl, NOW, "X") if c.event == "freezing_precipitation"]
    assert c.certainty == "Observed"
    # Not yet begun: an observation now cannot confirm a later onset.
    later = [_step(0), _step(60, ptype="FZRA", fz=0.6)]
    tl = {**_timeline(later), "observation": {"present_weather": "-FZRA"}}
    (c,) = [c for c in evaluate_rules(tl, NOW, "X") if c.event == "freezing_precipitation"]
    assert c.certainty == "Likely"


def test_cap_status_recorded_with_each_message(tmp_path):
    app, client, h, site = _service_with_site(tmp_path, PTYPE_CAP_STATUS="Exercise")
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs()}, headers=h)
    alert = client.get("/v1/alerts").json["alerts"][0]
    from ptype.roads.alerts import service
    from ptype.store import Alert
    with store_for(app).read() as s:
        xml = service.cap_for(s.get(Alert, alert["id"]), "x", None, 10.0).decode()
    assert "<status>Exercise</status>" in xml  # without any configuration at render time
    store_for(app).dispose()


def test_no_forecast_covering_now_does_not_cancel(tmp_path):
    app, client, h, site = _service_with_site(tmp_path)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs()}, headers=h)
    before = {a["id"]: a["status"] for a in client.get("/v1/alerts").json["alerts"]}
    # Five hours on, the 6-hour forecast still covers now; at 6 h 30 min it no longer does.
    app.config["PTYPE_NOW"] = "2026-01-27T06:30:00Z"
    client.post(f"/v1/sites/{site}/observations",
                json={"time": "2026-01-27T06:20:00Z", "air_temperature_c": 0.5}, headers=h)
    after = client.get("/v1/alerts").json["alerts"]
    assert after and all(a["status"] != "cancelled" for a in after)
    assert {a["id"] for a in after} == set(before)
    store_for(app).dispose()
