//! A counting semaphore that bounds how many photos are decoded and measured at once.

use std::sync::{Condvar, Mutex};

/// A counting semaphore (std `Mutex` + `Condvar`): at most `permits` holders at once.
#[derive(Debug)]
pub struct Semaphore {
    free: Mutex<usize>,
    freed: Condvar,
}

/// A held permit, given back when dropped.
#[derive(Debug)]
pub struct Permit<'a>(&'a Semaphore);

impl Semaphore {
    /// A semaphore with `permits` permits (at least one).
    pub fn new(permits: usize) -> Semaphore {
        Semaphore {
            free: Mutex::new(permits.max(1)),
            freed: Condvar::new(),
        }
    }

    /// Wait for a permit.
    pub fn acquire(&self) -> Permit<'_> {
        let mut free = self.free.lock().unwrap_or_else(|p| p.into_inner());
        while *free == 0 {
            free = self.freed.wait(free).unwrap_or_else(|p| p.into_inner());
        }
        *free -= 1;
        Permit(self)
    }
}

impl Drop for Permit<'_> {
    fn drop(&mut self) {
        let mut free = self.0.free.lock().unwrap_or_else(|p| p.into_inner());
        *free += 1;
        self.0.freed.notify_one();
    }
}
