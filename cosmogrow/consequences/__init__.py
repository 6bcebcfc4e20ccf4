"""What a value of k implies: the dark-energy budget of a coupled population of stellar remnants,
the remnants' masses today, the initial mass functions and the cosmic star-formation history they
use (docs/method.md#budget). Physics only: nothing here fits or simulates catalogues.
"""
