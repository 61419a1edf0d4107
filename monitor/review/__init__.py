"""Post-run review: replay a run log through the engine, summarise it, print it, write JSON and an HTML report."""

from monitor.review.build import Review, review_log
from monitor.review.summary import SCHEMA_VERSION, Summary

__all__ = ["Review", "SCHEMA_VERSION", "Summary", "review_log"]
