"""CME coronal dimming forecasts: flare loop evolution, dimming models and their instrument signatures."""
