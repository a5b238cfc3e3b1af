"""Header weights (service.contract.accept) against the examples and rules of RFC 9110, section 12.4.2 and 12.5."""

from __future__ import annotations

from service.contract.accept import names_media_type, quality
from service.http.negotiation import accepts_gzip


def test_quality_values() -> None:
    # RFC 9110, 12.4.2: a missing weight is 1; "q=0" means "not acceptable"
    assert quality("") == 1.0 and quality(" level=1") == 1.0
    assert quality(" q=0.5") == 0.5 and quality("q=0") == 0.0 and quality(" Q=0.8") == 0.8
    assert quality(" q=high") == 0.0  # not a qvalue: read as not acceptable


def test_a_media_type_must_be_named_with_a_weight_above_zero() -> None:
    # RFC 9110, 12.5.1 example: "audio/*; q=0.2, audio/basic"
    assert names_media_type("audio/*; q=0.2, audio/basic", "audio/basic")
    assert not names_media_type("audio/*; q=0.2", "audio/basic")  # a wildcard is not a request for this type
    assert not names_media_type("application/x-ndjson;q=0, application/json", "application/x-ndjson")
    assert names_media_type("Application/X-NDJSON", "application/x-ndjson")
    assert not names_media_type(None, "application/x-ndjson")


def test_gzip_weights() -> None:
    # RFC 9110, 12.5.3: "gzip;q=0" refuses gzip; "*" covers codings not named; identity alone does not ask for it
    assert accepts_gzip("gzip") and accepts_gzip("br;q=1.0, gzip;q=0.8, *;q=0.1")
    assert not accepts_gzip("gzip;q=0") and not accepts_gzip("identity") and not accepts_gzip("*;q=1, gzip;q=0")
    assert accepts_gzip("*")
