"""Live: following a recorder file as it grows and judging each row as it arrives."""
