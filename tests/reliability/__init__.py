"""Reliability evidence: schema fuzzing, request-model properties, bounded load against a real server."""
