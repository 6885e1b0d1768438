#include "core/alarm.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <string>

#include "core/engine_options.h"
#include "support/allocation_counter.h"

// Sources named beside each check:
//   ISA-18.2 diagram  ANSI/ISA-18.2-2016 alarm state transition diagram (from memory)
//   ISA-18.2 shelving ANSI/ISA-18.2-2016: shelving is time-limited, since forgotten shelved
//                     alarms are a known hazard (from memory)
//   TR18.2.5/EEMUA    ISA-TR18.2.5 / EEMUA 191 recommendations for on/off delays and
//                     deadbands, chattering = >= 3 activations in 1 min
//                     (../shared/references/references.md §7.2, from memory)
//   common practice   no standard behind it; our documented contract

namespace nightjar::core {
namespace {

constexpr TimestampUs kT0 = 1'700'000'000 * kMicrosPerSecond;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Absolute time `s` seconds after kT0.
TimestampUs At(double s) { return kT0 + FromSeconds(s); }

AlarmTiming Timing(double on_delay_s, double off_delay_s, double deadband) {
  AlarmTiming timing;
  timing.on_delay_s = on_delay_s;
  timing.off_delay_s = off_delay_s;
  timing.deadband = deadband;
  timing.chatter_raises = 0;  // the chattering treatment has tests of its own below
  return timing;
}

// ---- names and validation --------------------------------------------------------------

TEST(AlarmTest, StateNamesAreStableWireStrings) {
  EXPECT_STREQ(AlarmStateName(AlarmState::kNormal), "normal");                  // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kUnacknowledged), "unacknowledged");  // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kAcknowledged), "acknowledged");      // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kReturnedUnacknowledged),
               "returned_unacknowledged");                        // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kShelved), "shelved");  // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kSuppressedByDesign),
               "suppressed_by_design");                                       // ISA-18.2 diagram
  EXPECT_STREQ(AlarmStateName(AlarmState::kOutOfService), "out_of_service");  // ISA-18.2 diagram
  EXPECT_STREQ(AlarmEdgeName(AlarmEdge::kNone), "none");                      // common practice
  EXPECT_STREQ(AlarmEdgeName(AlarmEdge::kRaise), "raise");                    // common practice
  EXPECT_STREQ(AlarmEdgeName(AlarmEdge::kClear), "clear");                    // common practice
}

TEST(AlarmTest, ValidateTimingRejectsOutOfRangeFields) {
  EXPECT_TRUE(ValidateAlarmTiming(AlarmTiming{}).ok());  // common practice: defaults valid
  EXPECT_EQ(ValidateAlarmTiming(Timing(-1, 0, 0.1)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateAlarmTiming(Timing(0, kNaN, 0.1)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateAlarmTiming(Timing(0, 0, 1.0)).code(),
            StatusCode::kInvalidArgument);  // common practice: clear level must stay > 0
  EXPECT_EQ(ValidateAlarmTiming(Timing(0, 0, -0.1)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_NE(ValidateAlarmTiming(Timing(0, 0, 1.0)).message().find("deadband"),
            std::string::npos);  // common practice: the message names the field
  AlarmTiming no_shelf_limit;
  no_shelf_limit.max_shelve_s = 0;
  EXPECT_EQ(ValidateAlarmTiming(no_shelf_limit).code(),
            StatusCode::kInvalidArgument);  // ISA-18.2 shelving: a limit must exist
}

// ---- state transitions -----------------------------------------------------------------

TEST(AlarmTest, RaiseAcknowledgeClear) {
  Alarm alarm;
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);           // ISA-18.2 diagram: start
  EXPECT_EQ(alarm.Update(At(0), 0.5), AlarmEdge::kNone);   // ISA-18.2 diagram
  EXPECT_EQ(alarm.Update(At(1), 1.5), AlarmEdge::kRaise);  // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);   // ISA-18.2 diagram
  EXPECT_TRUE(alarm.active());                             // ISA-18.2 diagram
  ASSERT_TRUE(alarm.Acknowledge(At(2)).ok());              // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kAcknowledged);     // ISA-18.2 diagram
  EXPECT_EQ(alarm.acknowledged_at(), At(2));               // common practice
  EXPECT_EQ(alarm.Update(At(3), 1.2), AlarmEdge::kNone);   // ISA-18.2 diagram: stays
  EXPECT_EQ(alarm.Update(At(4), 0.2), AlarmEdge::kClear);  // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);           // ISA-18.2 diagram
  EXPECT_FALSE(alarm.active());                            // ISA-18.2 diagram
}

TEST(AlarmTest, ClearBeforeAcknowledgeThenAcknowledge) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.Update(At(1), 0.1), AlarmEdge::kClear);         // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kReturnedUnacknowledged);  // ISA-18.2 diagram
  EXPECT_FALSE(alarm.active());                                   // ISA-18.2 diagram
  ASSERT_TRUE(alarm.Acknowledge(At(2)).ok());                     // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);                  // ISA-18.2 diagram
}

TEST(AlarmTest, ReraiseFromReturnedUnacknowledged) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_EQ(alarm.Update(At(1), 0.1), AlarmEdge::kClear);
  ASSERT_EQ(alarm.state(), AlarmState::kReturnedUnacknowledged);
  EXPECT_EQ(alarm.Update(At(2), 3.0), AlarmEdge::kRaise);  // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);   // ISA-18.2 diagram
  EXPECT_EQ(alarm.raised_at(), At(2));                     // common practice
}

TEST(AlarmTest, AcknowledgeFailsWhenNothingToAcknowledge) {
  Alarm alarm;
  Status in_normal = alarm.Acknowledge(At(0));
  EXPECT_EQ(in_normal.code(), StatusCode::kFailedPrecondition);      // ISA-18.2 diagram
  EXPECT_NE(in_normal.message().find("normal"), std::string::npos);  // common practice
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);                     // ISA-18.2 diagram

  ASSERT_EQ(alarm.Update(At(1), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Acknowledge(At(2)).ok());
  Status twice = alarm.Acknowledge(At(3));
  EXPECT_EQ(twice.code(), StatusCode::kFailedPrecondition);            // ISA-18.2 diagram
  EXPECT_NE(twice.message().find("acknowledged"), std::string::npos);  // common practice
  EXPECT_EQ(alarm.state(), AlarmState::kAcknowledged);                 // ISA-18.2 diagram
  EXPECT_EQ(alarm.acknowledged_at(), At(2));                           // common practice: unchanged
}

TEST(AlarmTest, AcknowledgeFailsWhileSilenced) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Shelve(At(1), At(60)).ok());
  EXPECT_EQ(alarm.Acknowledge(At(2)).code(), StatusCode::kFailedPrecondition);  // ISA-18.2 diagram
  // Past the shelve end but before any Update/Tick: still shelved, the re-raise must not
  // be swallowed by an acknowledgement.
  EXPECT_EQ(alarm.Acknowledge(At(61)).code(), StatusCode::kFailedPrecondition);  // common practice
  EXPECT_EQ(alarm.Tick(At(61)), AlarmEdge::kRaise);                              // ISA-18.2 diagram
  EXPECT_TRUE(alarm.Acknowledge(At(62)).ok());                                   // ISA-18.2 diagram

  ASSERT_EQ(alarm.SetOutOfService(true), AlarmEdge::kNone);
  EXPECT_EQ(alarm.Acknowledge(At(63)).code(), StatusCode::kFailedPrecondition);  // ISA-18.2 diagram
}

// ---- on-delay, off-delay, deadband -----------------------------------------------------

TEST(AlarmTest, OnDelayConditionShorterThanDelayNeverRaises) {
  Alarm alarm(Timing(/*on_delay_s=*/5, 0, 0.1));
  for (int s = 0; s <= 4; ++s) {  // present for 4 s: shorter than the delay
    EXPECT_EQ(alarm.Update(At(s), 2.0), AlarmEdge::kNone);  // TR18.2.5/EEMUA: on-delay
  }
  EXPECT_EQ(alarm.condition_since(), At(0));              // common practice
  EXPECT_EQ(alarm.Update(At(5), 0.5), AlarmEdge::kNone);  // TR18.2.5/EEMUA: gone before 5 s
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);          // TR18.2.5/EEMUA
  EXPECT_FALSE(alarm.condition_since().has_value());      // common practice: timer reset
  EXPECT_FALSE(alarm.raised_at().has_value());            // common practice: never raised
}

TEST(AlarmTest, OnDelayRaisesAfterUnbrokenHold) {
  Alarm alarm(Timing(/*on_delay_s=*/5, 0, 0.1));
  for (int s = 0; s <= 3; ++s) ASSERT_EQ(alarm.Update(At(s), 2.0), AlarmEdge::kNone);
  // A dip into the deadband (0.95 >= clear level but < 1) breaks a pending raise: the
  // raise needs ratio >= 1 throughout; the deadband only holds an alarm already raised.
  EXPECT_EQ(alarm.Update(At(4), 0.95), AlarmEdge::kNone);  // TR18.2.5/EEMUA: on-delay
  for (int s = 10; s <= 14; ++s) {
    EXPECT_EQ(alarm.Update(At(s), 1.0), AlarmEdge::kNone);  // TR18.2.5/EEMUA: 4 s < 5 s
  }
  EXPECT_EQ(alarm.Update(At(15), 1.0), AlarmEdge::kRaise);  // TR18.2.5/EEMUA: 5 s held
  EXPECT_EQ(alarm.condition_since(), At(10));               // common practice
  EXPECT_EQ(alarm.raised_at(), At(15));                     // common practice
}

// The engine's default anomaly timing (15 s on-delay) on a channel sampled once a minute,
// slower than the delay: a lone outlying sample never raises, two in a row raise at the
// second (its update finds the condition held for 60 s >= 15 s).
TEST(AlarmTest, DefaultAnomalyOnDelayOnASlowChannelNeedsTwoSamples) {
  const AlarmTiming timing = ChannelOptions{}.anomaly_alarm;
  EXPECT_EQ(timing.on_delay_s, 15.0);  // TR18.2.5/EEMUA: flow/pressure starting value
  Alarm lone(timing);
  EXPECT_EQ(lone.Update(At(0), 3.0), AlarmEdge::kNone);   // TR18.2.5/EEMUA: on-delay
  EXPECT_EQ(lone.Update(At(60), 0.4), AlarmEdge::kNone);  // common practice: gone again
  EXPECT_EQ(lone.Update(At(120), 0.4), AlarmEdge::kNone);
  EXPECT_FALSE(lone.raised_at().has_value());  // TR18.2.5/EEMUA: one sample never raises
  Alarm pair(timing);
  EXPECT_EQ(pair.Update(At(0), 3.0), AlarmEdge::kNone);    // TR18.2.5/EEMUA: on-delay
  EXPECT_EQ(pair.Update(At(60), 1.5), AlarmEdge::kRaise);  // TR18.2.5/EEMUA: held 60 s
  EXPECT_EQ(pair.raised_at(), At(60));                     // common practice
}

TEST(AlarmTest, RatioExactlyOneIsPresent) {
  Alarm alarm;
  EXPECT_EQ(alarm.Update(At(0), 0.999999), AlarmEdge::kNone);  // common practice
  EXPECT_EQ(alarm.Update(At(1), 1.0), AlarmEdge::kRaise);      // common practice: ratio >= 1
}

TEST(AlarmTest, OffDelayClearsAfterUnbrokenHold) {
  Alarm alarm(Timing(0, /*off_delay_s=*/3, 0.1));
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.Update(At(1), 0.5), AlarmEdge::kNone);          // TR18.2.5/EEMUA: off-delay
  EXPECT_EQ(alarm.Update(At(3), 0.5), AlarmEdge::kNone);          // TR18.2.5/EEMUA: 2 s < 3 s
  EXPECT_EQ(alarm.Update(At(4), 1.2), AlarmEdge::kNone);          // TR18.2.5/EEMUA: back: restart
  EXPECT_EQ(alarm.Update(At(5), 0.5), AlarmEdge::kNone);          // TR18.2.5/EEMUA
  EXPECT_EQ(alarm.Update(At(7), 0.5), AlarmEdge::kNone);          // TR18.2.5/EEMUA: 2 s since 5
  EXPECT_TRUE(alarm.active());                                    // TR18.2.5/EEMUA
  EXPECT_EQ(alarm.Update(At(8), 0.5), AlarmEdge::kClear);         // TR18.2.5/EEMUA: 3 s held
  EXPECT_EQ(alarm.state(), AlarmState::kReturnedUnacknowledged);  // ISA-18.2 diagram
}

TEST(AlarmTest, DeadbandHoldsAlarmUntilBelowClearLevel) {
  Alarm alarm(Timing(0, 0, /*deadband=*/0.1));
  ASSERT_EQ(alarm.Update(At(0), 1.5), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.Update(At(1), 0.99), AlarmEdge::kNone);   // TR18.2.5/EEMUA: deadband
  EXPECT_EQ(alarm.Update(At(2), 0.91), AlarmEdge::kNone);   // TR18.2.5/EEMUA: above 0.9
  EXPECT_EQ(alarm.Update(At(3), 0.89), AlarmEdge::kClear);  // TR18.2.5/EEMUA: below 0.9
}

TEST(AlarmTest, DeadbandStopsChatteringAroundThreshold) {
  // Ratio alternating 0.95 / 1.05 each second for 2 minutes.
  Alarm with_deadband(Timing(0, 0, /*deadband=*/0.1));
  Alarm without_deadband(Timing(0, 0, /*deadband=*/0.0));
  int raises = 0;
  int clears = 0;
  int raises_without = 0;
  int raises_without_first_minute = 0;
  for (int s = 0; s < 120; ++s) {
    const double ratio = (s % 2 == 0) ? 1.05 : 0.95;
    const AlarmEdge edge = with_deadband.Update(At(s), ratio);
    raises += edge == AlarmEdge::kRaise ? 1 : 0;
    clears += edge == AlarmEdge::kClear ? 1 : 0;
    if (without_deadband.Update(At(s), ratio) == AlarmEdge::kRaise) {
      ++raises_without;
      if (s < 60) ++raises_without_first_minute;
    }
  }
  EXPECT_EQ(raises, 1);                 // TR18.2.5/EEMUA: deadband gives exactly one raise
  EXPECT_EQ(clears, 0);                 // TR18.2.5/EEMUA: and no clear
  EXPECT_TRUE(with_deadband.active());  // TR18.2.5/EEMUA
  // Without it the same signal chatters (>= 3 activations in one minute).
  EXPECT_GE(raises_without_first_minute, 3);  // TR18.2.5/EEMUA: chattering definition
  EXPECT_EQ(raises_without, 60);              // common practice: one per cycle
}

TEST(AlarmTest, OnDelayAlsoStopsChattering) {
  // The same oscillation with no deadband but a 2 s on-delay never raises at all: the
  // condition never holds for 2 s without a break.
  Alarm alarm(Timing(/*on_delay_s=*/2, 0, 0.0));
  int raises = 0;
  for (int s = 0; s < 120; ++s) {
    raises += alarm.Update(At(s), (s % 2 == 0) ? 1.05 : 0.95) == AlarmEdge::kRaise ? 1 : 0;
  }
  EXPECT_EQ(raises, 0);  // TR18.2.5/EEMUA: on-delay filters fleeting alarms
}

// ---- NaN, time, bookkeeping ------------------------------------------------------------

TEST(AlarmTest, NaNRatioIsNoInformation) {
  Alarm alarm(Timing(/*on_delay_s=*/5, /*off_delay_s=*/5, 0.1));
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kNone);
  for (int s = 1; s <= 4; ++s) {
    EXPECT_EQ(alarm.Update(At(s), kNaN), AlarmEdge::kNone);  // common practice: no edge
  }
  EXPECT_EQ(alarm.condition_since(), At(0));  // common practice: timer kept, not restarted
  EXPECT_EQ(alarm.Update(At(5), 2.0), AlarmEdge::kRaise);   // common practice: 5 s since t=0
  ASSERT_EQ(alarm.Update(At(6), 0.1), AlarmEdge::kNone);    // off-delay starts at t=6
  EXPECT_EQ(alarm.Update(At(11), kNaN), AlarmEdge::kNone);  // common practice: NaN never clears
  EXPECT_TRUE(alarm.active());                              // common practice
  EXPECT_EQ(alarm.Update(At(12), 0.1), AlarmEdge::kClear);  // common practice: timer kept
  EXPECT_EQ(alarm.Update(At(13), kNaN), AlarmEdge::kNone);  // common practice: NaN never raises
  EXPECT_FALSE(alarm.condition_since().has_value());        // common practice
}

TEST(AlarmTest, ConditionSinceRaisedAtAndPeak) {
  Alarm alarm(Timing(/*on_delay_s=*/2, 0, 0.1));
  EXPECT_EQ(alarm.peak_ratio(), 0.0);  // common practice: before any condition
  ASSERT_EQ(alarm.Update(At(10), 1.5), AlarmEdge::kNone);
  ASSERT_EQ(alarm.Update(At(11), 4.0), AlarmEdge::kNone);
  ASSERT_EQ(alarm.Update(At(12), 1.2), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.condition_since(), At(10));  // common practice: start of the run
  EXPECT_EQ(alarm.raised_at(), At(12));        // common practice
  EXPECT_EQ(alarm.peak_ratio(), 4.0);          // common practice: includes the on-delay
  ASSERT_EQ(alarm.Update(At(13), 0.95), AlarmEdge::kNone);
  EXPECT_EQ(alarm.condition_since(), At(10));  // common practice: deadband keeps the run
  ASSERT_EQ(alarm.Update(At(14), 6.0), AlarmEdge::kNone);
  ASSERT_EQ(alarm.Update(At(15), 0.1), AlarmEdge::kClear);
  EXPECT_EQ(alarm.peak_ratio(), 6.0);                 // common practice: kept after the clear
  EXPECT_EQ(alarm.raised_at(), At(12));               // common practice: kept after the clear
  EXPECT_FALSE(alarm.condition_since().has_value());  // common practice
  ASSERT_EQ(alarm.Update(At(16), 1.1), AlarmEdge::kNone);
  EXPECT_EQ(alarm.peak_ratio(), 1.1);          // common practice: new episode restarts it
  EXPECT_EQ(alarm.condition_since(), At(16));  // common practice
}

TEST(AlarmTest, BackwardTimeDoesNotRunDelays) {
  Alarm alarm(Timing(/*on_delay_s=*/5, 0, 0.1));
  ASSERT_EQ(alarm.Update(At(100), 2.0), AlarmEdge::kNone);
  // A timestamp from the past counts as "no time passed" (DESIGN-NOTES §6).
  EXPECT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kNone);     // common practice
  EXPECT_EQ(alarm.Update(At(104), 2.0), AlarmEdge::kNone);   // common practice
  EXPECT_EQ(alarm.Update(At(105), 2.0), AlarmEdge::kRaise);  // common practice
}

// ---- shelving --------------------------------------------------------------------------

TEST(AlarmTest, ShelvingSilencesAndExpiryReannunciatesActiveAlarm) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Acknowledge(At(1)).ok());
  ASSERT_TRUE(alarm.Shelve(At(2), At(62)).ok());
  EXPECT_EQ(alarm.state(), AlarmState::kShelved);           // ISA-18.2 diagram
  EXPECT_EQ(alarm.shelved_until(), At(62));                 // common practice
  EXPECT_EQ(alarm.Update(At(10), 0.1), AlarmEdge::kNone);   // ISA-18.2 diagram: clear not shown
  EXPECT_FALSE(alarm.active());                             // ISA-18.2 diagram: still tracked
  EXPECT_EQ(alarm.Update(At(20), 3.0), AlarmEdge::kNone);   // ISA-18.2 diagram: raise not shown
  EXPECT_TRUE(alarm.active());                              // ISA-18.2 diagram: still tracked
  EXPECT_EQ(alarm.raised_at(), At(20));                     // common practice
  EXPECT_EQ(alarm.Update(At(61), 3.0), AlarmEdge::kNone);   // ISA-18.2 shelving: not yet due
  EXPECT_EQ(alarm.state(), AlarmState::kShelved);           // ISA-18.2 shelving
  EXPECT_EQ(alarm.Update(At(62), 3.0), AlarmEdge::kRaise);  // ISA-18.2 shelving: expiry
  // The earlier acknowledgement does not survive shelving: the operator sees it anew.
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);  // ISA-18.2 diagram
  EXPECT_FALSE(alarm.shelved());                          // ISA-18.2 shelving
}

TEST(AlarmTest, ShelvingExpiryWithConditionGoneReturnsToNormal) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Shelve(At(1), At(30)).ok());
  ASSERT_EQ(alarm.Update(At(5), 0.1), AlarmEdge::kNone);
  EXPECT_EQ(alarm.Update(At(30), 0.1), AlarmEdge::kNone);  // ISA-18.2 diagram: nothing to show
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);           // ISA-18.2 diagram
}

TEST(AlarmTest, ShelvingExpiryFoldsThatUpdatesRatioIn) {
  // The update that reaches the shelve end also clears the condition: the state reflects
  // the ratio first, so the result is Normal with no edge (not a raise then a clear).
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Shelve(At(1), At(30)).ok());
  EXPECT_EQ(alarm.Update(At(30), 0.1), AlarmEdge::kNone);  // common practice
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);           // ISA-18.2 diagram
  // And the update that reaches the end with a fresh raise gives one kRaise.
  ASSERT_TRUE(alarm.Shelve(At(31), At(40)).ok());
  EXPECT_EQ(alarm.Update(At(41), 2.0), AlarmEdge::kRaise);  // common practice
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);    // ISA-18.2 diagram
}

TEST(AlarmTest, TickExpiresShelvingOnSilentChannel) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Shelve(At(1), At(30)).ok());
  EXPECT_EQ(alarm.Tick(At(29)), AlarmEdge::kNone);        // ISA-18.2 shelving
  EXPECT_EQ(alarm.Tick(At(30)), AlarmEdge::kRaise);       // ISA-18.2 shelving: ends on time
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);  // ISA-18.2 diagram
  // Update with NaN is the same clock-only step.
  ASSERT_TRUE(alarm.Shelve(At(31), At(40)).ok());
  EXPECT_EQ(alarm.Update(At(40), kNaN), AlarmEdge::kRaise);  // common practice
}

TEST(AlarmTest, UnshelveEarly) {
  Alarm alarm;
  EXPECT_EQ(alarm.Unshelve(At(0)), AlarmEdge::kNone);  // common practice: no-op
  ASSERT_TRUE(alarm.Shelve(At(0), At(100)).ok());      // ISA-18.2 diagram: any state
  EXPECT_EQ(alarm.state(), AlarmState::kShelved);      // ISA-18.2 diagram
  ASSERT_EQ(alarm.Update(At(1), 2.0), AlarmEdge::kNone);
  EXPECT_EQ(alarm.Unshelve(At(2)), AlarmEdge::kRaise);    // ISA-18.2 diagram: condition active
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);  // ISA-18.2 diagram
  ASSERT_TRUE(alarm.Shelve(At(3), At(100)).ok());
  ASSERT_EQ(alarm.Update(At(4), 0.1), AlarmEdge::kNone);
  EXPECT_EQ(alarm.Unshelve(At(5)), AlarmEdge::kNone);  // ISA-18.2 diagram: condition gone
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);       // ISA-18.2 diagram
}

TEST(AlarmTest, ShelveArgumentChecks) {
  Alarm alarm;  // default maximum: 8 h
  EXPECT_EQ(alarm.Shelve(At(10), At(10)).code(),
            StatusCode::kInvalidArgument);  // common practice: until must be after now
  EXPECT_EQ(alarm.Shelve(At(10), At(5)).code(), StatusCode::kInvalidArgument);  // common practice
  Status too_long = alarm.Shelve(At(10), At(10 + 8 * 3600 + 1));
  EXPECT_EQ(too_long.code(), StatusCode::kInvalidArgument);          // ISA-18.2 shelving
  EXPECT_NE(too_long.message().find("maximum"), std::string::npos);  // common practice
  EXPECT_FALSE(alarm.shelved());                                     // common practice: unchanged
  EXPECT_TRUE(alarm.Shelve(At(10), At(10 + 8 * 3600)).ok());         // ISA-18.2 shelving: at limit
  // Re-shelving replaces the end, still bounded from the new now.
  EXPECT_TRUE(alarm.Shelve(At(20), At(30)).ok());  // common practice
  EXPECT_EQ(alarm.shelved_until(), At(30));        // common practice

  AlarmTiming short_limit;
  short_limit.max_shelve_s = 60;
  Alarm strict(short_limit);
  EXPECT_EQ(strict.Shelve(At(0), At(61)).code(),
            StatusCode::kInvalidArgument);         // ISA-18.2 shelving
  EXPECT_TRUE(strict.Shelve(At(0), At(60)).ok());  // ISA-18.2 shelving
}

// ---- suppressed by design, out of service ----------------------------------------------

TEST(AlarmTest, SuppressedByDesignSilencesAndReturns) {
  Alarm alarm;
  EXPECT_EQ(alarm.SetSuppressedByDesign(true), AlarmEdge::kNone);    // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kSuppressedByDesign);         // ISA-18.2 diagram
  EXPECT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kNone);             // ISA-18.2 diagram
  EXPECT_TRUE(alarm.active());                                       // ISA-18.2 diagram: tracked
  EXPECT_EQ(alarm.SetSuppressedByDesign(true), AlarmEdge::kNone);    // common practice: no-op
  EXPECT_EQ(alarm.SetSuppressedByDesign(false), AlarmEdge::kRaise);  // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);             // ISA-18.2 diagram
  EXPECT_EQ(alarm.SetSuppressedByDesign(false), AlarmEdge::kNone);   // common practice: no-op
}

TEST(AlarmTest, OutOfServiceSilencesAndReturns) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.SetOutOfService(true), AlarmEdge::kNone);   // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kOutOfService);        // ISA-18.2 diagram
  EXPECT_EQ(alarm.Update(At(1), 0.1), AlarmEdge::kNone);      // ISA-18.2 diagram
  EXPECT_EQ(alarm.SetOutOfService(false), AlarmEdge::kNone);  // ISA-18.2 diagram: inactive
  EXPECT_EQ(alarm.state(), AlarmState::kNormal);              // ISA-18.2 diagram
}

TEST(AlarmTest, SilencingReasonsStackStrongestShown) {
  Alarm alarm;
  ASSERT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  ASSERT_TRUE(alarm.Shelve(At(1), At(100)).ok());
  ASSERT_EQ(alarm.SetSuppressedByDesign(true), AlarmEdge::kNone);
  ASSERT_EQ(alarm.SetOutOfService(true), AlarmEdge::kNone);
  EXPECT_EQ(alarm.state(), AlarmState::kOutOfService);        // common practice: strongest
  EXPECT_EQ(alarm.SetOutOfService(false), AlarmEdge::kNone);  // common practice: still silenced
  EXPECT_EQ(alarm.state(), AlarmState::kSuppressedByDesign);  // common practice
  EXPECT_EQ(alarm.Tick(At(100)), AlarmEdge::kNone);           // common practice: shelf ends quietly
  EXPECT_FALSE(alarm.shelved());                              // ISA-18.2 shelving
  EXPECT_EQ(alarm.state(), AlarmState::kSuppressedByDesign);  // common practice
  EXPECT_EQ(alarm.SetSuppressedByDesign(false), AlarmEdge::kRaise);  // ISA-18.2 diagram
  EXPECT_EQ(alarm.state(), AlarmState::kUnacknowledged);             // ISA-18.2 diagram
}

// ---- per-sample cost -------------------------------------------------------------------

TEST(AlarmTest, UpdateNeverAllocates) {
  Alarm alarm(Timing(1, 1, 0.1));
  nightjar::testing::AllocationCounter counter;
  for (int s = 0; s < 200; ++s) {
    (void)alarm.Update(At(s), (s / 10) % 2 == 0 ? 2.0 : 0.1);
    (void)alarm.Tick(At(s));
  }
  EXPECT_EQ(counter.count(), 0U);  // common practice: STYLE.md, no heap on the sample path
}

}  // namespace
}  // namespace nightjar::core

namespace nightjar::core {
namespace {

TEST(AlarmTest, AChatteringAlarmStandsAsOneUntilAQuietWindow) {
  // A condition that comes back every 10 minutes for 2 minutes: with a 30 s off-delay
  // each return is a new raise, the chattering alarm that floods an operator (ISA-18.2
  // TR18.2.5 / EEMUA 191 name it a bad actor). With the chattering treatment the third
  // raise within the hour (common practice: three returns) holds the clear for the window.
  AlarmTiming timing = Timing(0, 30, 0.0);
  timing.chatter_raises = 3;
  timing.chatter_window_s = 3600;
  Alarm treated(timing);
  Alarm untreated(Timing(0, 30, 0.0));
  int treated_raises = 0;
  int untreated_raises = 0;
  const int cycles_s = 6 * 3600;
  for (int s = 0; s < cycles_s; ++s) {
    const double ratio = s % 600 < 120 ? 2.0 : 0.0;
    treated_raises += treated.Update(At(s), ratio) == AlarmEdge::kRaise ? 1 : 0;
    untreated_raises += untreated.Update(At(s), ratio) == AlarmEdge::kRaise ? 1 : 0;
  }
  EXPECT_EQ(untreated_raises, 36) << "premise: one raise per return";
  EXPECT_EQ(treated_raises, 3) << "the third raise makes it chattering; it then stands";
  EXPECT_TRUE(treated.chattering());
  EXPECT_TRUE(treated.active());

  // Quiet: it clears one window after the condition last left, not 30 s after.
  const int last_return_end = cycles_s - 600 + 120;
  int cleared_at = -1;
  for (int s = cycles_s; s < cycles_s + 2 * 3600 && cleared_at < 0; ++s) {
    if (treated.Update(At(s), 0.0) == AlarmEdge::kClear) cleared_at = s;
  }
  EXPECT_EQ(cleared_at, last_return_end + 3600);

  // A single raise afterwards is not chattering: it clears after the plain off-delay
  // (the raises that made it chattering are out of the window by then).
  const int t0 = cleared_at + 3600;
  EXPECT_EQ(treated.Update(At(t0), 2.0), AlarmEdge::kRaise);
  EXPECT_FALSE(treated.chattering());
  int clear = -1;
  for (int s = t0 + 1; s < t0 + 200 && clear < 0; ++s) {
    if (treated.Update(At(s), 0.0) == AlarmEdge::kClear) clear = s;
  }
  EXPECT_EQ(clear, t0 + 1 + 30);
}

TEST(AlarmTest, ChatteringRulesAreValidatedAndAWithdrawalForgetsTheHistory) {
  AlarmTiming timing;
  timing.chatter_raises = 1;  // one raise cannot repeat
  EXPECT_EQ(ValidateAlarmTiming(timing).code(), StatusCode::kInvalidArgument);
  timing.chatter_raises = kMaxChatterRaises + 1;
  EXPECT_EQ(ValidateAlarmTiming(timing).code(), StatusCode::kInvalidArgument);
  timing.chatter_raises = 0;
  EXPECT_TRUE(ValidateAlarmTiming(timing).ok());
  timing.chatter_raises = 2;
  timing.chatter_window_s = 0;
  EXPECT_EQ(ValidateAlarmTiming(timing).code(), StatusCode::kInvalidArgument);

  timing = Timing(0, 0, 0.0);
  timing.chatter_raises = 2;
  timing.chatter_window_s = 600;
  Alarm alarm(timing);
  EXPECT_EQ(alarm.Update(At(0), 2.0), AlarmEdge::kRaise);
  EXPECT_EQ(alarm.Update(At(1), 0.0), AlarmEdge::kClear);
  (void)alarm.Withdraw(At(2));  // a re-learn: the old condition's raises say nothing now
  EXPECT_EQ(alarm.Update(At(3), 2.0), AlarmEdge::kRaise);
  EXPECT_FALSE(alarm.chattering());
  EXPECT_EQ(alarm.Update(At(4), 0.0), AlarmEdge::kClear);
}

}  // namespace
}  // namespace nightjar::core
