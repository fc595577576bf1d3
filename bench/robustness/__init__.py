"""The robustness campaign's modules (entry point: ``bench/robustness_campaign.py``)."""
