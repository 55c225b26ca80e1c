//! The engine: which instrument answers to which currency (`relevance`),
//! how long each release's window lasts (`windows`), and which trades meet
//! which windows (`exposure`). Depends only on `import`.

pub mod exposure;
pub mod relevance;
pub mod windows;
