//! Single-field only: the canonical field chi(phi), the domain of phi with its ends and
//! poles, the asymptotic form of V(chi), and the branches of V along the one field.

pub mod asymptote;
pub mod branches;
pub mod canonical;
pub mod domain;
pub mod pole;
