"""The formulas rules call: colour science (CAM02-UCS, CVD simulation, WCAG contrast) and Hartigan's dip test."""
