//! startmargin-service (under construction)
