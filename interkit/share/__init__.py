"""Sharing results: provenance (verify, rerun), the HTML report and exports."""
