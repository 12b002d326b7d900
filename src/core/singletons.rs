//! The rows the two-way fixed effects keep: singletons peeled until none is left, and which row
//! follows its entity's previous period.

use super::*;

impl PanelCore {
    /// For each row, whether the row before is the previous period (by value) of the same
    /// entity.
    pub fn previous_period(&self) -> Vec<bool> {
        let value = |code: u32| self.periods[code as usize];
        std::iter::once(false)
            .chain(
                self.entity
                    .windows(2)
                    .zip(self.period.windows(2))
                    .map(|(e, t)| e[0] == e[1] && value(t[1]) == value(t[0]) + 1),
            )
            .take(self.rows())
            .collect()
    }

    /// Distinct keys removed by dropping, again and again, every key whose entity or period
    /// has a single key left (Correia 2015): what is left is the largest set in which every
    /// entity and every period has two keys or more, whatever the order of removal.
    pub fn two_way_singletons(&self) -> u64 {
        let (_, alive) = self.peel();
        alive.iter().filter(|a| !**a).count() as u64
    }

    /// For each row, whether its key survives that iterated dropping.
    pub fn two_way_kept(&self) -> Vec<bool> {
        match self.peel() {
            // Every row its own key.
            (None, alive) => alive,
            (Some(starts), alive) => {
                let mut k = 0;
                (0..self.rows())
                    .map(|r| {
                        if starts.get(k + 1).is_some_and(|s| *s as usize == r) {
                            k += 1;
                        }
                        alive[k]
                    })
                    .collect()
            }
        }
    }

    /// The distinct keys and whether each survives the peeling. Copies of a key sit next to
    /// each other in the sorted panel: the keys are the rows where each starts, None when
    /// every row is its own key (the usual case, which needs no list).
    fn peel(&self) -> (Option<Vec<u32>>, Vec<bool>) {
        let rows = self.rows();
        let same = |r: usize| {
            r > 0 && self.entity[r] == self.entity[r - 1] && self.period[r] == self.period[r - 1]
        };
        let starts: Option<Vec<u32>> = (1..rows)
            .any(same)
            .then(|| (0..rows).filter(|r| !same(*r)).map(|r| r as u32).collect());
        let keys = starts.as_ref().map_or(rows, Vec::len);
        let row = |k: usize| starts.as_ref().map_or(k, |s| s[k] as usize);
        let key = |k: usize| {
            let r = row(k);
            (self.entity[r] as usize, self.period[r] as usize)
        };
        let (ne, nt) = (self.entities(), self.periods.len());
        let mut e_keys = vec![0u32; ne];
        let mut t_keys = vec![0u32; nt];
        for k in 0..keys {
            let (e, t) = key(k);
            e_keys[e] += 1;
            t_keys[t] += 1;
        }
        // An entity's keys are consecutive; each period's keys in one buffer, in key order
        // (a counting sort by period).
        let offsets = |counts: &[u32]| {
            let mut at = vec![0usize; counts.len() + 1];
            for (i, n) in counts.iter().enumerate() {
                at[i + 1] = at[i] + *n as usize;
            }
            at
        };
        let (e_start, t_start) = (offsets(&e_keys), offsets(&t_keys));
        // Only a period left with one key needs the period's list, which a panel of many
        // entities seldom has: the list (four bytes a key) is made on first need.
        let list_by_period = || {
            let mut by_period = vec![0u32; keys];
            let mut next = t_start.clone();
            for k in 0..keys {
                let t = key(k).1;
                by_period[next[t]] = k as u32;
                next[t] += 1;
            }
            by_period
        };
        let mut by_period: Option<Vec<u32>> = None;
        let mut alive = vec![true; keys];
        let mut stack: Vec<(bool, u32)> = (0..ne)
            .filter(|e| e_keys[*e] == 1)
            .map(|e| (true, e as u32))
            .chain(
                (0..nt)
                    .filter(|t| t_keys[*t] == 1)
                    .map(|t| (false, t as u32)),
            )
            .collect();
        while let Some((is_entity, i)) = stack.pop() {
            let i = i as usize;
            let k = if is_entity {
                if e_keys[i] != 1 {
                    continue;
                }
                (e_start[i]..e_start[i + 1]).find(|k| alive[*k])
            } else {
                if t_keys[i] != 1 {
                    continue;
                }
                by_period.get_or_insert_with(list_by_period)[t_start[i]..t_start[i + 1]]
                    .iter()
                    .map(|k| *k as usize)
                    .find(|k| alive[*k])
            };
            let Some(k) = k else { continue };
            alive[k] = false;
            let (e, t) = key(k);
            e_keys[e] -= 1;
            t_keys[t] -= 1;
            if e_keys[e] == 1 {
                stack.push((true, e as u32));
            }
            if t_keys[t] == 1 {
                stack.push((false, t as u32));
            }
        }
        (starts, alive)
    }
}
