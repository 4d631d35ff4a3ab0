"""Hypothesis strategies shared by the tests (one place, as the house style asks)."""

from __future__ import annotations
