//! Indices into the search's fixed-size arrays, typed by the array's length.

use super::*;
use std::marker::PhantomData;
use std::ops::{Index, IndexMut};

/// An index into one of the search's fixed-size arrays of `N` elements
/// (`[T; N]`): a role, a composite, a constraint, a four-vector slot, an
/// object, a b-tag row.
///
/// **Invariant: the index is below `N`.** Every slot is made by
/// [`Slot::new`] from a number the plan compiler or the object loader has
/// already bounded (a hypothesis has at most [`MAX_ROLES`] roles, an event
/// enters with at most [`MAX_JETS`] jets, …); `new` checks it in debug
/// builds, so the test suite catches a slot made out of range.
///
/// Indexing with a slot reduces it modulo `N` anyway ([`Slot::get`]). For
/// the power-of-two lengths it allows (checked at compile time) that is a single AND, and it lets the
/// compiler drop the bounds check: the innermost loops have no branch to a
/// panic, and a release build with a broken invariant would read a wrong
/// element, never out of bounds. Stored in one byte, so the
/// compiled plan's source lists stay as small as before. `K` says what the
/// index counts ([`Role`], [`Comp`], …), so a role and a composite slot are
/// different types even where their arrays have the same length.
pub(super) struct Slot<K, const N: usize>(u8, PhantomData<K>);

// By hand: derived impls would require `K: Copy`, `K: PartialEq`, ….
impl<K, const N: usize> Clone for Slot<K, N> {
    #[inline(always)]
    fn clone(&self) -> Self {
        *self
    }
}
impl<K, const N: usize> Copy for Slot<K, N> {}
impl<K, const N: usize> PartialEq for Slot<K, N> {
    #[inline(always)]
    fn eq(&self, other: &Self) -> bool {
        self.0 == other.0
    }
}
impl<K, const N: usize> Eq for Slot<K, N> {}
impl<K, const N: usize> std::fmt::Debug for Slot<K, N> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.0)
    }
}

impl<K, const N: usize> Slot<K, N> {
    /// The slot of index `i`, which must be below `N` (checked in debug
    /// builds; see the type's invariant).
    #[inline(always)]
    pub(super) const fn new(i: usize) -> Slot<K, N> {
        const { assert!(N.is_power_of_two() && N <= 256) };
        debug_assert!(i < N, "slot index out of range");
        Slot(i as u8, PhantomData)
    }

    /// The index, below `N`.
    #[inline(always)]
    pub(super) const fn get(self) -> usize {
        self.0 as usize % N
    }

    /// The slot `o` places after this one: object `o` of a pool that starts
    /// here (see [`JET_BASE`] and friends).
    #[inline(always)]
    pub(super) const fn offset(self, o: usize) -> Slot<K, N> {
        Slot::new(self.0 as usize + o)
    }
}

impl<T, K, const N: usize> Index<Slot<K, N>> for [T; N] {
    type Output = T;
    #[inline(always)]
    fn index(&self, s: Slot<K, N>) -> &T {
        &self[s.get()]
    }
}

impl<T, K, const N: usize> IndexMut<Slot<K, N>> for [T; N] {
    #[inline(always)]
    fn index_mut(&mut self, s: Slot<K, N>) -> &mut T {
        &mut self[s.get()]
    }
}

/// What a slot counts (type markers, never values).
pub(super) enum Role {}
/// See [`Role`].
pub(super) enum Depth {}
/// See [`Role`].
pub(super) enum Comp {}
/// See [`Role`].
pub(super) enum Con {}
/// See [`Role`].
pub(super) enum P4 {}
/// See [`Role`].
pub(super) enum Obj {}
/// See [`Role`].
pub(super) enum Jet {}
/// See [`Role`].
pub(super) enum Lep {}
/// See [`Role`].
pub(super) enum Large {}
/// See [`Role`].
pub(super) enum Pen {}

/// A role, below [`MAX_ROLES`].
pub(super) type RoleSlot = Slot<Role, MAX_ROLES>;
/// A search depth (step `d` fills one role), below [`MAX_ROLES`].
pub(super) type DepthSlot = Slot<Depth, MAX_ROLES>;
/// A composite, below [`MAX_COMPOSITES`].
pub(super) type CompSlot = Slot<Comp, MAX_COMPOSITES>;
/// A constraint, below [`MAX_CONSTRAINTS`].
pub(super) type ConSlot = Slot<Con, MAX_CONSTRAINTS>;
/// A four-vector of `Workspace::p4s`: roles, then composites ([`SLOTS`]).
pub(super) type P4Slot = Slot<P4, SLOTS>;
/// An object four-vector of `Workspace::obj_p4` ([`OBJ_SLOTS`]).
pub(super) type ObjSlot = Slot<Obj, OBJ_SLOTS>;
/// A jet among the leading ones, below [`MAX_JETS`]. Also indexes the b-tag
/// rows for lepton and neutrino steps (row 0, zeros), whose objects are
/// fewer than [`MAX_JETS`].
pub(super) type JetSlot = Slot<Jet, MAX_JETS>;
/// A lepton, below [`MAX_LEPTONS`].
pub(super) type LepSlot = Slot<Lep, MAX_LEPTONS>;
/// A large-radius jet, below [`MAX_LARGE_JETS`].
pub(super) type LargeSlot = Slot<Large, MAX_LARGE_JETS>;
/// Rows of `Workspace::pen`: 0 for `any` roles, 1 for `b`, 2 for `light`,
/// and an unused one that makes the count a power of two.
pub(super) const PEN_ROWS: usize = 4;
/// A row of `Workspace::pen`, below [`PEN_ROWS`].
pub(super) type PenRow = Slot<Pen, PEN_ROWS>;

impl RoleSlot {
    /// The four-vector slot of this role.
    #[inline(always)]
    pub(super) const fn p4(self) -> P4Slot {
        Slot::new(self.get())
    }
}

impl CompSlot {
    /// The four-vector slot of this composite (after the roles').
    #[inline(always)]
    pub(super) const fn p4(self) -> P4Slot {
        Slot::new(MAX_ROLES + self.get())
    }
}

const _: () = assert!(MAX_ROLES + MAX_COMPOSITES == SLOTS);
const _: () = assert!(MAX_LEPTONS <= MAX_JETS && 2 <= MAX_JETS);
