"""The built-in appliance and cable catalogue (CSV), shipped inside the wheel as ``leakbudget.appliance_data``."""
