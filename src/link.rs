//! The share link: query string ⇄ design state, lenient for the page, strict for the command line.
