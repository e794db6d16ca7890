//! The work of a hydrant's search by the role each solve plays in it, for `--stats`: where the
//! sweep's solves, iterations and factorizations go (docs/performance.md measures with it).

/// The role of a solve in a hydrant's search (docs/fire-flow-method.md §2).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SolveRole {
    /// The ordinary solve at the required flow.
    Required,
    /// The cap verified before any held solve, when the supply curve reaches the floor well
    /// beyond it.
    CapFirst,
    /// The hydrant's junction held at the floor, to place the hydrant-limited flow.
    Held,
    /// The ordinary solve just below the held flow that verifies it.
    Verification,
    /// Every other solve: the cap after a held solve, brackets, first-crossing grids, restarts,
    /// the pressure-dependent state of a failing hydrant.
    Other,
}

impl SolveRole {
    /// Every role, in the order `--stats` prints them.
    pub const ALL: [SolveRole; 5] = [
        SolveRole::Required,
        SolveRole::CapFirst,
        SolveRole::Held,
        SolveRole::Verification,
        SolveRole::Other,
    ];

    /// The role's name in the `--stats` output.
    pub fn label(self) -> &'static str {
        match self {
            SolveRole::Required => "required flow",
            SolveRole::CapFirst => "cap first",
            SolveRole::Held => "held at the floor",
            SolveRole::Verification => "verification",
            SolveRole::Other => "other",
        }
    }

    /// The role's slot in [`WorkByRole`]: its place in [`SolveRole::ALL`].
    fn index(self) -> usize {
        self as usize
    }
}

/// Solves, solver iterations and numeric factorizations of the whole network's matrix.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct SolveWork {
    pub solves: u64,
    pub iterations: u64,
    pub factorizations: u64,
}

impl SolveWork {
    /// The work of `solves` solves that took `iterations` iterations and `factorizations`
    /// factorizations.
    pub fn of(solves: u32, iterations: u32, factorizations: u32) -> Self {
        SolveWork {
            solves: u64::from(solves),
            iterations: u64::from(iterations),
            factorizations: u64::from(factorizations),
        }
    }

    fn add(&mut self, other: SolveWork) {
        self.solves += other.solves;
        self.iterations += other.iterations;
        self.factorizations += other.factorizations;
    }
}

/// [`SolveWork`] for each [`SolveRole`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct WorkByRole([SolveWork; SolveRole::ALL.len()]);

impl WorkByRole {
    /// Adds one solve's (or one group of solves') work to `role`.
    pub fn add(&mut self, role: SolveRole, work: SolveWork) {
        self.0[role.index()].add(work);
    }

    /// The work of `role`.
    pub fn of(&self, role: SolveRole) -> SolveWork {
        self.0[role.index()]
    }

    /// The work of every role added together.
    pub fn total(&self) -> SolveWork {
        let mut total = SolveWork::default();
        for w in &self.0 {
            total.add(*w);
        }
        total
    }

    /// Adds every role's work of `other`.
    pub fn add_all(&mut self, other: &WorkByRole) {
        for role in SolveRole::ALL {
            self.add(role, other.of(role));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Common practice, no source: counters add up by role and in total.
    #[test]
    fn roles_add_up_to_the_total() {
        let mut w = WorkByRole::default();
        let one = SolveWork {
            solves: 1,
            iterations: 3,
            factorizations: 2,
        };
        w.add(SolveRole::Required, one);
        w.add(SolveRole::Held, one);
        w.add(SolveRole::Held, one);
        assert_eq!(w.of(SolveRole::Held).iterations, 6);
        assert_eq!(w.of(SolveRole::CapFirst), SolveWork::default());
        assert_eq!(
            w.total(),
            SolveWork {
                solves: 3,
                iterations: 9,
                factorizations: 6
            }
        );
        // Each role has its own slot, in the order `--stats` prints them.
        for (i, role) in SolveRole::ALL.into_iter().enumerate() {
            assert_eq!(role.index(), i);
        }
        let mut sum = WorkByRole::default();
        sum.add_all(&w);
        sum.add_all(&w);
        assert_eq!(sum.total().solves, 6);
    }
}
