//! One tabular CUSUM over a contiguous part of a field log's units, kept as the part's
//! effect on whatever state it is entered with, so that parts counted apart compose into
//! exactly the single pass's sums and first-alarm units.
//!
//! The device's step (`shared_model::field::CusumState`) is, for the upper sum,
//! `C ↦ max(0, (C ⊕ d) ⊖ k)` with `d = m ⊖ μ₀` and `⊕`/`⊖` saturating `i64` arithmetic (the
//! lower sum alike with `⊖ d`). On the states a sum can hold, `0 ≤ C ≤ i64::MAX`, that is
//! exactly the clamp `C ↦ min(H, max(0, C + a))` in exact integers, with `a = d − k`
//! (lower sum: `−d − k`) and `H = i64::MAX − max(k, 0)`: saturation at the top is the upper
//! clamp `H`, saturation at the bottom gives a negative value that `max(0, ·)` makes 0 either
//! way. Maps of the form `C ↦ clamp(C + a, lo, hi)` are closed under composition
//! (`clamp(clamp(x + a₁, l₁, h₁) + a₂, l₂, h₂) = clamp(x + a₁ + a₂, g(l₁), g(h₁))` with
//! `g` the second map), so a part of any length is one [`Clamp`], and the saturating device
//! arithmetic is reproduced bit for bit, not approximated.
//!
//! The first alarm: after the part's j-th unit the sum is `F_j(C)`, `F_j` the composition of
//! its first j steps, non-decreasing in the state `C` the part is entered with. So the sum
//! passes h at unit j exactly when `C ≥ t_j` (`t_j` the least state with `F_j > h`), and the
//! first alarm is at the first j with `C ≥ t_j`. Only the units whose `t_j` is below every
//! earlier one can ever be first: those are the part's alarm records, thresholds strictly
//! falling, units rising. Entered with 0 (a whole log), the first alarm is the record of
//! threshold 0. Composing, the later part's records are pulled back through the earlier
//! part's map (`C ≥ least state that the map takes to t`) and kept where they fall below the
//! earlier part's last threshold. Both the map (canonical: `lo = F(0)`, `hi = F(i64::MAX)`,
//! a constant map's shift equal to its value) and the records (the least description of a
//! step function) are unique for a given function, so any tree of merges over parts kept in
//! order gives the same value, field for field.
//!
//! Size: one record per unit at the very worst (thresholds are strictly falling integers);
//! a part in control keeps a few, and none once its own sum has alarmed from 0.

use serde::{Deserialize, Serialize};
use shared_model::field::{CusumPlan, CusumState};

/// The composed effect of steps on a sum: `C ↦ clamp(C + shift, lo, hi)` for the states a
/// sum can hold (`0 ≤ C ≤ i64::MAX`), kept canonical: `lo` is the image of 0, `hi` that of
/// `i64::MAX`, and a constant map (`lo == hi`) has `shift == lo`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Clamp {
    /// What the map adds to a state it does not clamp.
    pub shift: i64,
    /// The image of state 0 (the least image).
    pub lo: i64,
    /// The image of state `i64::MAX` (the greatest image).
    pub hi: i64,
}

impl Default for Clamp {
    fn default() -> Self {
        Self::IDENTITY
    }
}

impl Clamp {
    /// No step: every state maps to itself.
    pub const IDENTITY: Self = Self {
        shift: 0,
        lo: 0,
        hi: i64::MAX,
    };

    /// The map `C ↦ clamp(C + add, 0, top)` (`0 ≤ top`), made canonical.
    fn of(add: i128, top: i64) -> Self {
        let top = i128::from(top.max(0));
        let at = |c: i128| (c + add).clamp(0, top);
        Self::canonical(add, at(0), at(i128::from(i64::MAX)))
    }

    /// `(shift, lo, hi)` with `lo`/`hi` the images of the ends (both within `0..=i64::MAX`):
    /// a constant map's shift is its value, any other's shift lies within ±`i64::MAX`.
    fn canonical(shift: i128, lo: i128, hi: i128) -> Self {
        let n = |v: i128| i64::try_from(v).unwrap_or(if v < 0 { i64::MIN } else { i64::MAX });
        if lo == hi {
            Self {
                shift: n(lo),
                lo: n(lo),
                hi: n(hi),
            }
        } else {
            Self {
                shift: n(shift),
                lo: n(lo),
                hi: n(hi),
            }
        }
    }

    /// The image of state `c`.
    pub fn apply(&self, c: i64) -> i64 {
        let v = (i128::from(c) + i128::from(self.shift))
            .clamp(i128::from(self.lo), i128::from(self.hi));
        i64::try_from(v).unwrap_or(self.hi)
    }

    /// This map, then `next`.
    pub fn then(&self, next: &Self) -> Self {
        Self::canonical(
            i128::from(self.shift) + i128::from(next.shift),
            i128::from(next.apply(self.lo)),
            i128::from(next.apply(self.hi)),
        )
    }

    /// The least state whose image is at least `target`, if any state's is.
    pub fn least_reaching(&self, target: i128) -> Option<i64> {
        if target <= i128::from(self.lo) {
            Some(0)
        } else if target > i128::from(self.hi) {
            None
        } else {
            // lo < target ≤ hi: the map is `C + shift` there, and the state lies in 1..=MAX.
            i64::try_from(target - i128::from(self.shift)).ok()
        }
    }

    /// Whether the map is canonical (what a map read from elsewhere must be).
    fn is_canonical(&self) -> bool {
        0 <= self.lo
            && self.lo <= self.hi
            && (self.lo < self.hi || self.shift == self.lo)
            && self.apply(0) == self.lo
            && self.apply(i64::MAX) == self.hi
    }
}

/// A unit of the part at which the sum passes h when the part is entered with a state of at
/// least `from`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlarmRecord {
    /// The least entering state for which this unit alarms.
    pub from: i64,
    /// The unit's 1-based number within the part (all units count).
    pub unit: u64,
}

/// One CUSUM sum (upper or lower) over a part: its composed map and its alarm records.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct SumPart {
    /// The part's effect on the sum.
    pub map: Clamp,
    /// The units that can be the first alarm, thresholds strictly falling.
    pub records: Vec<AlarmRecord>,
}

impl SumPart {
    /// One step `C ↦ clamp(C + add, 0, top)` at the part's unit `unit`, alarming above
    /// `limit`.
    fn step(&mut self, add: i128, top: i64, limit: i64, unit: u64) {
        self.map = self.map.then(&Clamp::of(add, top));
        self.note(limit, unit);
    }

    /// Records `unit` if it alarms for entering states below every earlier record's.
    fn note(&mut self, limit: i64, unit: u64) {
        let Some(from) = self.map.least_reaching(i128::from(limit) + 1) else {
            return;
        };
        if self.records.last().is_none_or(|r| from < r.from) {
            self.records.push(AlarmRecord { from, unit });
        }
    }

    /// `earlier` then `later`, the later part's units numbered after `offset` units.
    pub fn merge(earlier: &Self, later: &Self, offset: u64) -> Self {
        let mut records = earlier.records.clone();
        for r in &later.records {
            let Some(from) = earlier.map.least_reaching(i128::from(r.from)) else {
                continue;
            };
            if records.last().is_none_or(|e| from < e.from) {
                records.push(AlarmRecord {
                    from,
                    unit: r.unit.saturating_add(offset),
                });
            }
        }
        Self {
            map: earlier.map.then(&later.map),
            records,
        }
    }

    /// The sum after the part entered with `state`, and the part's unit of its first alarm
    /// (none when no unit passes h).
    pub fn from_state(&self, state: i64) -> (i64, Option<u64>) {
        let first = self
            .records
            .iter()
            .find(|r| r.from <= state)
            .map(|r| r.unit);
        (self.map.apply(state), first)
    }

    /// The map is canonical and the records fall strictly, units rising within `units`.
    fn is_sound(&self, units: u64) -> bool {
        self.map.is_canonical()
            && self
                .records
                .windows(2)
                .all(|w| w[1].from < w[0].from && w[1].unit > w[0].unit)
            && self
                .records
                .iter()
                .all(|r| r.from >= 0 && (1..=units).contains(&r.unit))
    }
}

/// Both sums of one side's CUSUM over a part.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct CusumPart {
    /// The upper sum (margins growing).
    pub up: SumPart,
    /// The lower sum (margins shrinking).
    pub down: SumPart,
}

impl CusumPart {
    /// One margin at the part's unit `unit`, stepped as the device steps it.
    pub fn step(&mut self, plan: &CusumPlan, margin: i64, unit: u64) {
        let d = i128::from(margin.saturating_sub(plan.target));
        let k = i128::from(plan.slack);
        let top = i64::MAX - plan.slack.max(0);
        self.up.step(d - k, top, plan.limit, unit);
        self.down.step(-d - k, top, plan.limit, unit);
    }

    /// `earlier` then `later` (`offset`: the earlier part's units).
    pub fn merge(earlier: &Self, later: &Self, offset: u64) -> Self {
        Self {
            up: SumPart::merge(&earlier.up, &later.up, offset),
            down: SumPart::merge(&earlier.down, &later.down, offset),
        }
    }

    /// The state after a whole log that starts with this part (both sums from 0), as the
    /// device keeps it; `None` when an alarm unit does not fit the record's `u32`.
    pub fn state(&self) -> Option<CusumState> {
        let (up, alarm_up) = self.up.from_state(0);
        let (down, alarm_down) = self.down.from_state(0);
        Some(CusumState {
            up,
            down,
            alarm_up: u32::try_from(alarm_up.unwrap_or(0)).ok()?,
            alarm_down: u32::try_from(alarm_down.unwrap_or(0)).ok()?,
        })
    }

    /// Both sums are sound for a part of `units` units.
    pub(crate) fn is_sound(&self, units: u64) -> bool {
        self.up.is_sound(units) && self.down.is_sound(units)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan(target: i64, slack: i64, limit: i64) -> CusumPlan {
        CusumPlan {
            target,
            slack,
            limit,
        }
    }

    /// The device's step as shared-model's `CusumState::step` writes it (run_part's tests
    /// check against `FieldStats` itself).
    fn device(state: (i64, i64), p: &CusumPlan, m: i64) -> (i64, i64) {
        let d = m.saturating_sub(p.target);
        (
            state.0.saturating_add(d).saturating_sub(p.slack).max(0),
            state.1.saturating_sub(d).saturating_sub(p.slack).max(0),
        )
    }

    /// By hand: μ₀ = 50, k = 5, h = 40; margins 40, 30, 80 add +5, +15, −35 to the lower
    /// sum (μ₀ − m − k), so from 0 it reads 5, 20, 0. The part's lower map is
    /// C ↦ max(0, C − 15) (its top i64::MAX − 5 − 35: the ceiling k = 5 leaves, moved down
    /// by the last step). First alarm (C⁻ > 40): after unit 1 when C + 5 ≥ 41 (C ≥ 36),
    /// after unit 2 when C + 20 ≥ 41 (C ≥ 21), after unit 3 only from C ≥ 56, never first:
    /// records (36, 1), (21, 2).
    #[test]
    fn composition_and_records_worked_by_hand() {
        let p = plan(50, 5, 40);
        let mut part = CusumPart::default();
        for (i, m) in [40, 30, 80].into_iter().enumerate() {
            part.step(&p, m, i as u64 + 1);
        }
        assert_eq!(
            part.down.map,
            Clamp {
                shift: -15,
                lo: 0,
                hi: i64::MAX - 5 - 35
            }
        );
        assert_eq!(
            part.down.records,
            vec![
                AlarmRecord { from: 36, unit: 1 },
                AlarmRecord { from: 21, unit: 2 }
            ]
        );
        assert_eq!(part.down.from_state(0), (0, None));
        assert_eq!(part.down.from_state(20), (5, None));
        assert_eq!(part.down.from_state(21), (6, Some(2)));
        assert_eq!(part.down.from_state(36), (21, Some(1)));
    }

    /// Across a boundary, h = 39: part 1 (margins 40, 30: +5, +15) takes C to C + 20 and
    /// alarms at its unit 1 from C ≥ 35, at its unit 2 from C ≥ 20; part 2 (margins 35, 80:
    /// +10, −35) alarms at its unit 1 from C ≥ 30. Merged, part 2's record is pulled back
    /// through C ↦ C + 20: unit 3 from C ≥ 10. From 0 the whole reads 5, 20, 30, 0: no alarm;
    /// entered at 10 it reads 15, 30, 40, 5: the first alarm at unit 3.
    #[test]
    fn first_alarm_across_a_boundary_worked_by_hand() {
        let p = plan(50, 5, 39);
        let steps = |ms: &[i64]| {
            let mut part = CusumPart::default();
            for (i, &m) in ms.iter().enumerate() {
                part.step(&p, m, i as u64 + 1);
            }
            part
        };
        let (a, b) = (steps(&[40, 30]), steps(&[35, 80]));
        assert_eq!(a.down.from_state(0), (20, None));
        assert_eq!(b.down.records, vec![AlarmRecord { from: 30, unit: 1 }]);
        let ab = CusumPart::merge(&a, &b, 2);
        assert_eq!(
            ab.down.records,
            vec![
                AlarmRecord { from: 35, unit: 1 },
                AlarmRecord { from: 20, unit: 2 },
                AlarmRecord { from: 10, unit: 3 }
            ]
        );
        // Whole log from 0: 5, 20, 30, 0 (unit 3 = 30 is not above 39: no alarm from 0).
        assert_eq!(ab.down.from_state(0), (0, None));
        let mut s = (0, 0);
        for m in [40, 30, 35, 80] {
            s = device(s, &p, m);
        }
        assert_eq!(ab.down.from_state(0).0, s.1);
        assert_eq!(ab.down.from_state(10), (5, Some(3)));
    }

    /// The saturating device step at the top of i64 equals the clamp, for slacks of either
    /// sign, and composes with later steps.
    #[test]
    fn saturation_is_the_upper_clamp() {
        for slack in [-7, 0, 7, i64::MAX, i64::MIN] {
            let p = plan(-5, slack, 10);
            for m in [i64::MAX, i64::MIN, 0, 3, -3] {
                let mut part = CusumPart::default();
                part.step(&p, m, 1);
                part.step(&p, m, 2);
                for c in [0, 1, 100, i64::MAX / 2, i64::MAX - 1, i64::MAX] {
                    let want = device(device((c, c), &p, m), &p, m);
                    let got = (part.up.from_state(c).0, part.down.from_state(c).0);
                    assert_eq!(got, want, "slack {slack}, margin {m}, state {c}");
                }
            }
        }
    }
}
