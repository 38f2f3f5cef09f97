"""Headless workbook tools: safe opening, atomic saving, recalculation."""
