"""Deriving valuation assumptions from market data (prices, a yield curve, dividends, peers)."""
