/**
 * Supervising one run: {@link dev.stepwarden.supervise.Supervisor} is the coordinator
 * (launch generations, decisions, signals, pre-emption, resume) with its {@link
 * dev.stepwarden.supervise.RunOptions}, {@link dev.stepwarden.supervise.RunOutcome}, {@link
 * dev.stepwarden.supervise.RunObserver} hooks and the {@link dev.stepwarden.supervise.RunDirectory}
 * layout. Its parts are package-private: the sample path, steering, the checkpoint keeper, the
 * launcher, resumption, the periodic task and pre-emption.
 */
package dev.stepwarden.supervise;
