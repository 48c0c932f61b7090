/**
 * The command line: {@link dev.stepwarden.cli.Main} and its subcommands ({@code run},
 * {@code check}, {@code replay}, {@code report}, {@code queue}, {@code serve}, {@code schema},
 * {@code demo}, {@code completion}, {@code helper}); {@link dev.stepwarden.cli.ExitCodes} lists
 * what each exit code means.
 */
package dev.stepwarden.cli;
