"""The portable fitted-model document (write, canonical form, read), inverse prediction and
calibration figures of merit."""
