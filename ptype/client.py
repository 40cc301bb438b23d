"""A Python client of the ptype HTTP service (``ptype serve``).

It speaks to the ``/v1`` API over HTTP with :mod:`requests` (a core dependency) and
returns plain Python values: a diagnosis is the same dictionary that
``ptype.diagnose(...).to_dict()`` gives for the same profile, options, seed and members::

    from ptype.client import Client

    with Client("http://127.0.0.1:8080", key="...") as api:
        d = api.diagnose("soundings_demo/json/korrim-pass_20260127T1000.json", members=50, seed=1)
        print(d["ptype"], d["probabilities"], d["caution"])

Every failure raises one exception type, :class:`ApiError`, with the HTTP status and the
``code``, ``message`` and ``field`` of the service's JSON error.  Reads (``GET``) are retried
on connection failures, time-outs and 502/503/504 answers with a bounded exponential backoff;
writes and diagnoses (``POST``) are sent once.

Answers are guidance (``ptype.CAUTION``): official warnings, local codes and licensed
practice take precedence.
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any, Self

import requests

from ptype import __version__

__all__ = ["DEFAULT_TIMEOUT_S", "RETRY_STATUSES", "ApiError", "Client"]

#: Seconds to wait for the server's answer unless the client is told otherwise.
DEFAULT_TIMEOUT_S = 60.0
#: HTTP statuses after which a ``GET`` is tried again (the server or a proxy is busy).
RETRY_STATUSES = frozenset({502, 503, 504})
#: Longest pause between two tries, seconds.
MAX_BACKOFF_S = 8.0

#: Content type sent for a profile file, by file suffix (others are read here first).
_FILE_TYPES = {".json": "application/json", ".csv": "text/csv", ".txt": "text/plain",
               ".temp": "text/plain", ".tmp": "text/plain"}

Profileish = Any  # a ptype.Profile, a profile document (mapping) or a path to a profile file


class ApiError(Exception):
    """A request the service refused or could not answer.

    Attributes
    ----------
    status : int or None
        The HTTP status; None when no answer came (connection refused, time-out).
    code : str
        The service's error code (e.g. ``invalid_profile``); ``unreachable`` or ``timeout``
        without an answer, ``http_<status>`` for an answer that is not a service error.
    message : str
        The service's message, naming the field, the value and what was expected.
    field : str or None
        The field or query option at fault, when the error is about one.
    """

    def __init__(self, status: int | None, code: str, message: str,
                 field: str | None = None) -> None:
        super().__init__(f"{status or 'no answer'} {code}: {message}")
        self.status = status
        self.code = code
        self.message = message
        self.field = field


class Client:
    """A connection to one ptype service.

    Parameters
    ----------
    base_url : str
        Root of the service, e.g. ``http://127.0.0.1:8080`` (a trailing ``/`` is ignored).
    key : str, optional
        API key for the operations that change data (``Authorization: Bearer KEY``);
        create one with ``ptype keys create``.
    timeout : float, optional
        Seconds to wait for an answer (default :data:`DEFAULT_TIMEOUT_S`).
    retries : int, optional
        How many more times a ``GET`` is tried after a failure that may pass (default 3).
    backoff : float, optional
        Pause before the first retry, seconds; it doubles each time, up to
        :data:`MAX_BACKOFF_S` (default 0.5).

    Notes
    -----
    Profiles may be given as a :class:`ptype.Profile`, a profile document (a mapping, as in
    ``docs/formats.md``) or a path.  JSON, CSV and WMO TEMP files (``.json``, ``.csv``,
    ``.txt``) are sent as they are, so the service reads them exactly as ``ptype diagnose``
    would; other files (NetCDF) are read here with :func:`ptype.read_profile` and sent as
    a document.  Use the client as a context manager, or call :meth:`close`.
    """

    def __init__(self, base_url: str, key: str | None = None, timeout: float = DEFAULT_TIMEOUT_S,
                 *, retries: int = 3, backoff: float = 0.5) -> None:
        if retries < 0 or backoff < 0 or timeout <= 0:
            raise ValueError("retries and backoff must be 0 or more, timeout more than 0")
        self.base_url = base_url.rstrip("/")
        self.key = key
        self.timeout = timeout
        self.retries = retries
        self.backoff = backoff
        self._session = requests.Session()
        self._session.headers["User-Agent"] = f"ptype-client/{__version__}"

    def __repr__(self) -> str:
        return f"Client({self.base_url!r}, key={'***' if self.key else None})"

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Close the connections kept open to the service."""
        self._session.close()

    # -- diagnosis -------------------------------------------------------------------------

    def diagnose(self, profile: Profileish, **options: Any) -> dict:
        """Diagnose one profile (``POST /v1/diagnose``).

        Parameters
        ----------
        profile : Profile, mapping or path
            The sounding (see the class notes).
        **options
            Query options of the service: ``members``, ``seed``, ``methods`` (a list or a
            comma-separated string), ``wetbulb`` and, for text files, ``input``.

        Returns
        -------
        dict
            The diagnosis, as ``ptype.diagnose(...).to_dict()``.
        """
        body, content_type = _profile_body(profile)
        return self._request("POST", "/v1/diagnose", params=options, data=body,
                             content_type=content_type).json()

    def diagnose_batch(self, profiles: Iterable[Profileish], **options: Any) -> list[dict]:
        """Diagnose several profiles in one request (``POST /v1/diagnose/batch``).

        Returns
        -------
        list of dict
            One entry per profile, in order: a diagnosis, or ``{"error": {...}}`` for a
            profile the service could not read (the others are still diagnosed).
        """
        body = {"profiles": [_document(p) for p in profiles]}
        return self._post_json("/v1/diagnose/batch", body, params=options)["results"]

    def diagram(self, profile: Profileish, format: str = "png", **options: Any) -> bytes:
        """The thermodynamic diagram of a profile (``POST /v1/diagram``), PNG or SVG bytes."""
        body, content_type = _profile_body(profile)
        return self._request("POST", "/v1/diagram", params={"format": format, **options},
                             data=body, content_type=content_type).content

    def verify(self, cases: Iterable[Mapping[str, Any]], *, members: int | None = None,
               seed: int | None = None, methods: Iterable[str] | str | None = None) -> dict:
        """Score diagnoses against observed weather (``POST /v1/verify``).

        Parameters
        ----------
        cases : iterable of mapping
            Each ``{"profile": <profile>, "observed": "-FZRA BR", ...}``; the profile may be
            anything :meth:`diagnose` takes.
        members, seed, methods : optional
            Monte-Carlo members and seed of the probabilities, and the methods to score.

        Returns
        -------
        dict
            The verification report (``ptype.verify.run_verification``).
        """
        body: dict[str, Any] = {"cases": [dict(c, profile=_document(c["profile"]))
                                          if "profile" in c else dict(c) for c in cases]}
        for name, value in (("members", members), ("seed", seed)):
            if value is not None:
                body[name] = value
        if methods is not None:
            body["methods"] = methods if isinstance(methods, str) else list(methods)
        return self._post_json("/v1/verify", body)

    # -- sites, timelines, alerts ----------------------------------------------------------

    def sites(self) -> list[dict]:
        """Every registered site (``GET /v1/sites``)."""
        return self._get("/v1/sites")["sites"]

    def site(self, site_id: int) -> dict:
        """One site with its thresholds and latest data (``GET /v1/sites/{site_id}``)."""
        return self._get(f"/v1/sites/{int(site_id)}")

    def create_site(self, name: str, latitude: float, longitude: float, *,
                    elevation_m: float | None = None, code: str | None = None,
                    thresholds: Mapping[str, float] | None = None) -> dict:
        """Register a road site (``POST /v1/sites``; needs a key); returns the stored site."""
        body = _without_none({"name": name, "latitude": latitude, "longitude": longitude,
                              "elevation_m": elevation_m, "code": code,
                              "thresholds": dict(thresholds) if thresholds else None})
        return self._post_json("/v1/sites", body)

    def upload_profiles(self, site_id: int, profiles: Iterable[Profileish], *,
                        issued_time: str | None = None, source: str | None = None) -> dict:
        """Store forecast profiles of one model run for a site (needs a key).

        Each profile needs its ``valid_time``.  ``POST /v1/sites/{site_id}/profiles``;
        returns how many were stored and replaced, and the alert actions that followed.
        """
        body = _without_none({"issued_time": issued_time, "source": source,
                              "profiles": [_document(p) for p in profiles]})
        return self._post_json(f"/v1/sites/{int(site_id)}/profiles", body)

    def upload_observations(self, site_id: int,
                            observations: Mapping[str, Any] | Iterable[Mapping[str, Any]]
                            ) -> dict:
        """Store surface observations at a site (needs a key).

        ``POST /v1/sites/{site_id}/observations``: one observation or several, each with
        ``time`` and the measured values (see ``docs/api.md``).
        """
        items = [observations] if isinstance(observations, Mapping) else list(observations)
        return self._post_json(f"/v1/sites/{int(site_id)}/observations",
                               {"observations": [dict(o) for o in items]})

    def timeline(self, site_id: int, **options: Any) -> dict:
        """The type timeline, transitions and road hazards of a site.

        ``GET /v1/sites/{site_id}/timeline`` with the service's options: ``hours``,
        ``step`` (e.g. ``"15min"``), ``members``, ``adjustments`` (a list or
        comma-separated string; empty for none) and ``now`` (ISO 8601).
        """
        return self._get(f"/v1/sites/{int(site_id)}/timeline", params=options)

    def alerts(self, site: int | None = None, active: bool = False) -> dict:
        """Active and recently ended alerts (``GET /v1/alerts``).

        Returns
        -------
        dict
            ``{"alerts": [...], "now": ..., "caution": ...}``, of one site if ``site`` is given,
            without the ended ones if ``active``.
        """
        params: dict[str, Any] = {"site": site} if site is not None else {}
        if active:
            params["active"] = 1
        return self._get("/v1/alerts", params=params)

    def alert_cap(self, alert_id: str) -> str:
        """The latest OASIS CAP 1.2 message of one alert, as XML text."""
        return self._request("GET", f"/v1/alerts/{alert_id}.cap").text

    def alerts_atom(self) -> str:
        """The Atom feed of the alerts, as XML text."""
        return self._request("GET", "/v1/alerts.atom").text

    def evaluate_alerts(self) -> dict:
        """Re-evaluate every site's alerts now (``POST /v1/alerts/evaluate``; needs a key)."""
        return self._request("POST", "/v1/alerts/evaluate").json()

    # -- the service itself ----------------------------------------------------------------

    def health(self) -> dict:
        """Liveness and version of the service (``GET /healthz``)."""
        return self._get("/healthz")

    def demo(self) -> list[dict]:
        """The invented demo soundings the service offers (``GET /v1/demo``)."""
        return self._get("/v1/demo")["soundings"]

    def openapi(self) -> dict:
        """The OpenAPI 3.1 description of the service (``GET /openapi.json``)."""
        return self._get("/openapi.json")

    # -- plumbing --------------------------------------------------------------------------

    def _get(self, path: str, params: Mapping[str, Any] | None = None) -> Any:
        return self._request("GET", path, params=params).json()

    def _post_json(self, path: str, body: Any, params: Mapping[str, Any] | None = None) -> Any:
        return self._request("POST", path, params=params, data=json.dumps(body).encode(),
                             content_type="application/json").json()

    def _request(self, method: str, path: str, *, params: Mapping[str, Any] | None = None,
                 data: bytes | None = None, content_type: str | None = None
                 ) -> requests.Response:
        """One request; ``GET`` is tried again after failures that may pass."""
        headers = {"Accept": "application/json, */*;q=0.5"}
        if content_type:
            headers["Content-Type"] = content_type
        if self.key:
            headers["Authorization"] = f"Bearer {self.key}"
        tries = 1 + (self.retries if method == "GET" else 0)
        for attempt in range(tries):
            last = attempt == tries - 1
            try:
                response = self._session.request(method, self.base_url + path,
                                                 params=_query(params), data=data,
                                                 headers=headers, timeout=self.timeout)
            except requests.Timeout as exc:
                if last:
                    raise ApiError(None, "timeout", f"{method} {path}: no answer within "
                                   f"{self.timeout:g} s") from exc
            except requests.ConnectionError as exc:
                if last:
                    raise ApiError(None, "unreachable", f"{method} {path}: cannot reach "
                                   f"{self.base_url} ({_reason(exc)})") from exc
            else:
                if response.status_code < 400:
                    return response
                if last or response.status_code not in RETRY_STATUSES:
                    raise _error(response)
            time.sleep(min(self.backoff * 2 ** attempt, MAX_BACKOFF_S))
        raise AssertionError("unreachable")  # pragma: no cover - the loop returns or raises


def _query(params: Mapping[str, Any] | None) -> dict[str, str] | None:
    """Query options as the service reads them: lists comma-joined, booleans 1/0."""
    if not params:
        return None
    out = {}
    for name, value in params.items():
        if value is None:
            continue
        if isinstance(value, bool):
            value = int(value)
        elif isinstance(value, (list, tuple, set, frozenset)):
            value = ",".join(str(v) for v in value)
        out[name] = str(value)
    return out


def _error(response: requests.Response) -> ApiError:
    """The :class:`ApiError` of an error answer (the service's JSON error when it is one)."""
    try:
        error = response.json()["error"]
        return ApiError(response.status_code, str(error["code"]), str(error["message"]),
                        error.get("field"))
    except (ValueError, KeyError, TypeError):
        text = " ".join(response.text.split())[:200] or response.reason or "no body"
        return ApiError(response.status_code, f"http_{response.status_code}", text)


def _reason(exc: Exception) -> str:
    text = str(exc)
    return "connection refused" if "refused" in text.lower() else text[:200]


def _without_none(values: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in values.items() if v is not None}


def _profile_body(profile: Profileish) -> tuple[bytes, str]:
    """The body and content type of a single-profile request."""
    if isinstance(profile, (str, os.PathLike)):
        path = Path(profile)
        content_type = _FILE_TYPES.get(path.suffix.lower())
        if content_type is not None:
            return path.read_bytes(), content_type
    return json.dumps(_document(profile)).encode(), "application/json"


def _document(profile: Profileish) -> dict:
    """A profile document (the JSON form) of a Profile, a mapping or a profile file."""
    if isinstance(profile, Mapping):
        return dict(profile)
    if isinstance(profile, (str, os.PathLike)):
        path = Path(profile)
        if path.suffix.lower() == ".json":
            return json.loads(path.read_text(encoding="utf-8"))
        from ptype.readers import read_profile
        profile = read_profile(path)
    to_document = getattr(profile, "to_document", None)
    if to_document is None:
        raise TypeError(f"expected a ptype.Profile, a profile document or a path, "
                        f"got {type(profile).__name__}")
    return to_document()
