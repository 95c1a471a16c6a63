//! Phrase-pair extraction from word-aligned parallel text (to be written).
