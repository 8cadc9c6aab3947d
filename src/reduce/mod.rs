//! Drives one run through the stages (lead's module).
