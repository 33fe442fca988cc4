"""Black-Scholes-Merton prices and greeks, implied volatilities, implied forwards and
American exercise. Pure numpy: arrays in, arrays out; no printing, no UI."""
