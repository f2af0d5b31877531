"""Lotproof client for Python 3.9+: the standard library only (urllib, json).

    from lotproof import LotproofClient
    lp = LotproofClient("https://lotproof.example", api_key=os.environ["LOTPROOF_KEY"])
    verdict = lp.submit_lot({"sku": "OATS-500", "lotCode": "L-0412", "lotSize": 2400,
                             "testing": "non-destructive", "measurementUnit": "g",
                             "measurementBasis": "net", "measurements": [...]})
    print(verdict["decision"], verdict["seal"]["value"])

Shapes follow the OpenAPI document served at /v1/openapi.json. Errors are raised as
LotproofProblem carrying the RFC 9457 problem details (status, type, detail, errors[].pointer).
"""
from __future__ import annotations

import json
import urllib.error
import urllib.parse
import urllib.request
from typing import Any, Dict, Iterator, Optional

__all__ = ["LotproofClient", "LotproofProblem"]


class LotproofProblem(Exception):
    """An RFC 9457 problem returned by the API."""

    def __init__(self, status: int, problem: Dict[str, Any]):
        self.status = status
        self.problem = problem
        self.type = problem.get("type")
        self.detail = problem.get("detail") or problem.get("title") or f"HTTP {status}"
        self.errors = problem.get("errors", [])
        super().__init__(f"{status}: {self.detail}")


class LotproofClient:
    def __init__(self, base_url: str, api_key: str, timeout: float = 60.0):
        self.base_url = base_url.rstrip("/")
        self.api_key = api_key
        self.timeout = timeout

    def _request(self, method: str, path: str, body: Any = None, query: Optional[Dict[str, Any]] = None,
                 headers: Optional[Dict[str, str]] = None) -> Any:
        url = self.base_url + path
        if query:
            url += "?" + urllib.parse.urlencode({k: v for k, v in query.items() if v is not None})
        data = None
        all_headers = {"Authorization": f"Bearer {self.api_key}", "Accept": "application/json"}
        if body is not None:
            data = json.dumps(body, allow_nan=False).encode("utf-8")
            all_headers["Content-Type"] = "application/json"
        all_headers.update(headers or {})
        req = urllib.request.Request(url, data=data, method=method, headers=all_headers)
        try:
            with urllib.request.urlopen(req, timeout=self.timeout) as res:
                raw = res.read()
                return json.loads(raw) if raw else None
        except urllib.error.HTTPError as err:
            raw = err.read()
            try:
                problem = json.loads(raw)
            except ValueError:
                problem = {"title": raw.decode("utf-8", "replace")[:200]}
            raise LotproofProblem(err.code, problem) from None

    def submit_lot(self, lot: Dict[str, Any], idempotency_key: Optional[str] = None) -> Dict[str, Any]:
        """POST /v1/lots. Pass an idempotency key (e.g. the lot code) so a retry never makes a second verdict."""
        headers = {"Idempotency-Key": idempotency_key} if idempotency_key else None
        return self._request("POST", "/v1/lots", body=lot, headers=headers)

    def get_verdict(self, verdict_id: str) -> Dict[str, Any]:
        return self._request("GET", f"/v1/verdicts/{urllib.parse.quote(verdict_id)}")

    def get_seal(self, seal: str) -> Dict[str, Any]:
        """GET /v1/seals/{seal}: the sealed record, its signature and chain neighbours."""
        return self._request("GET", f"/v1/seals/{urllib.parse.quote(seal)}")

    def verdicts(self, **filters: Any) -> Iterator[Dict[str, Any]]:
        """Every verdict matching the filters (product, line, decision, from, to, lotCode, sort), following cursors."""
        cursor = None
        while True:
            page = self._request("GET", "/v1/verdicts", query={**filters, "cursor": cursor})
            yield from page["items"]
            cursor = page.get("nextCursor")
            if not cursor:
                return

    def verify_ledger(self) -> Dict[str, Any]:
        """GET /v1/ledger/verify: walks the organisation's chain and reports the first break, if any."""
        return self._request("GET", "/v1/ledger/verify")
