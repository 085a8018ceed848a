"""beltwave dashboard: reads the store and shows recommendations, model health and what-if."""
