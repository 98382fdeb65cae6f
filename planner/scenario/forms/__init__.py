"""Scenario input and output in the planner's other forms: .xlsx workbooks and CSV folders."""
