"""The one assessment: duty and distortion findings, the study stage, the verdict."""
