"""Configurations, scans, job stores and executors."""
