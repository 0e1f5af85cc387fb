"""Criteria sets and the SQL rules that judge every curve and station."""
