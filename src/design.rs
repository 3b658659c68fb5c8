//! The composer: requirement → response → sections → stages → standard values → board.
