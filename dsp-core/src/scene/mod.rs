//! (in progress) demo scene synthesiser.
