/**
 * `tracewright surveys`: the survey and profile records from the command line, the same as the
 * control room's Surveys pages (same checks, db/survey-fields.ts; same audit events).
 *
 *   tracewright surveys list [--search TEXT] [--json]
 *   tracewright surveys show <survey> [--json]
 *   tracewright surveys create <survey> --name NAME [--client --site --purpose --start-date --end-date --notes]
 *   tracewright surveys update <survey> [--name --client --site --purpose --start-date --end-date --notes]
 *   tracewright surveys add-profile <survey> <line> [--orientation DEG --spread TEXT --crs EPSG:nnnn --start X,Y --end X,Y --description TEXT]
 *   tracewright surveys add-person <survey> <email> --role ROLE
 */
import type { Command } from "commander";
import type { z } from "zod";
import { addProfile, createSurvey, getSurveyBySlug, getSurveyDetail, listSurveys, setSurveyPerson, updateSurvey } from "../../db/queries/surveys";
import { getUserByEmail } from "../../db/queries/users";
import { newSurvey, profileFields, surveyDetails, surveyPerson, surveySlug } from "../../db/survey-fields";
import { SURVEY_ROLES } from "../../db/vocabulary";
import { AppError } from "../../pipeline/errors";
import { action, openCliDb, printJson, resolveActor } from "../shared";

/** Changing surveys: any role but the auditor's. */
const EDIT = { doing: "change surveys", roles: ["admin", "lead", "processor"] as const };

/** The command-line name of each schema field. */
const OPTION_OF: Record<string, string> = {
  slug: "<survey>",
  name: "--name",
  client: "--client",
  site: "--site",
  purpose: "--purpose",
  startDate: "--start-date",
  endDate: "--end-date",
  notes: "--notes",
  orientationDeg: "--orientation",
  spreadDescription: "--spread",
  crs: "--crs",
  startX: "--start",
  startY: "--start",
  endX: "--end",
  endY: "--end",
  description: "--description",
  email: "<email>",
  role: "--role",
};

/** A zod failure as one AppError naming the option and what it expects. */
function parseOrExplain<S extends z.ZodType>(schema: S, input: unknown, lineName?: string): z.infer<S> {
  const r = schema.safeParse(input);
  if (r.success) return r.data;
  const i = r.error.issues[0];
  const key = String(i.path[0] ?? "");
  const option = key === "name" && lineName !== undefined ? "<line>" : (OPTION_OF[key] ?? key);
  throw new AppError("bad-input", `${option}: expected ${i.message}`, { field: option, expected: i.message });
}

/** "X,Y" → two numbers (NaN when malformed, which the schema refuses naming the option). */
function pair(value: string | undefined): [number | null, number | null] {
  if (value === undefined) return [null, null];
  const parts = value.split(",").map((p) => p.trim());
  if (parts.length !== 2 || parts.some((p) => p === "")) return [Number.NaN, Number.NaN];
  return [Number(parts[0]), Number(parts[1])];
}

interface DetailOptions {
  name?: string;
  client?: string;
  site?: string;
  purpose?: string;
  startDate?: string;
  endDate?: string;
  notes?: string;
  as?: string;
}

function detailOptions(cmd: Command, nameRequired: boolean): Command {
  (nameRequired ? cmd.requiredOption("--name <name>", "full name of the survey") : cmd.option("--name <name>", "full name of the survey"))
    .option("--client <client>", "who the survey is for")
    .option("--site <site>", "where it is")
    .option("--purpose <text>", "what it is for")
    .option("--start-date <date>", "first day in the field, YYYY-MM-DD")
    .option("--end-date <date>", "last day in the field, YYYY-MM-DD")
    .option("--notes <text>", "notes")
    .option("--as <email>", "who makes the change (default: TRACEWRIGHT_USER, else the OS user)");
  return cmd;
}

const pickDetails = (o: DetailOptions) =>
  Object.fromEntries(
    (["name", "client", "site", "purpose", "startDate", "endDate", "notes"] as const).filter((k) => o[k] !== undefined).map((k) => [k, o[k]]),
  );

export function registerSurveys(program: Command): void {
  const surveys = program.command("surveys").description("surveys and their profiles (lines): list, show, create, update, add profiles and people");

  surveys
    .command("list")
    .description("list surveys")
    .option("--search <text>", "only surveys whose name, short name, client, site or purpose contains the text")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (opts: { search?: string; json?: boolean }) => {
        const rows = listSurveys(openCliDb(), opts.search ?? "");
        if (opts.json) {
          printJson(rows.map((s) => ({ slug: s.slug, name: s.name, client: s.client, site: s.site, startDate: s.startDate, endDate: s.endDate, profiles: s.profileCount, runs: s.runCount })));
          return;
        }
        if (rows.length === 0) process.stdout.write(opts.search ? `no survey matches "${opts.search}"\n` : "no surveys yet\n");
        for (const s of rows) process.stdout.write(`${s.slug.padEnd(20)} ${s.name.padEnd(32)} ${(s.client || "-").padEnd(28)} ${s.profileCount} profile(s), ${s.runCount} run(s)\n`);
      }),
    );

  surveys
    .command("show")
    .description("a survey with its people, profiles (and latest approved model), datasets and runs")
    .argument("<survey>", "short name")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (slug: string, opts: { json?: boolean }) => {
        const d = getSurveyDetail(openCliDb(), slug, 20);
        if (!d) throw new AppError("not-found", `No survey "${slug}" (see tracewright surveys list)`, { field: "<survey>" });
        const s = d.survey;
        if (opts.json) {
          printJson({
            slug: s.slug,
            name: s.name,
            client: s.client,
            site: s.site,
            purpose: s.purpose,
            startDate: s.startDate,
            endDate: s.endDate,
            notes: s.notes,
            people: d.people.map((p) => ({ email: p.email, name: p.name, role: p.role })),
            profiles: d.profiles.map((p) => ({
              name: p.name,
              orientationDeg: p.orientationDeg,
              spreadDescription: p.spreadDescription,
              crs: p.crs,
              start: p.startX === null ? null : [p.startX, p.startY],
              end: p.endX === null ? null : [p.endX, p.endY],
              latestApprovedModel: p.latestApprovedModel,
            })),
            datasets: d.datasets.map((x) => ({ id: x.id, name: x.name, profile: x.profileName, files: x.fileCount })),
            runs: d.runs.map((r) => ({ id: r.id, status: r.status, pipeline: r.pipelineName, profile: r.profileName, review: r.review })),
          });
          return;
        }
        const out = (l: string) => process.stdout.write(`${l}\n`);
        out(`${s.name} (${s.slug})`);
        for (const [k, v] of [["client", s.client], ["site", s.site], ["purpose", s.purpose], ["dates", s.startDate || s.endDate ? `${s.startDate || "?"} to ${s.endDate || "?"}` : ""], ["notes", s.notes]]) {
          if (v) out(`  ${k.padEnd(9)} ${v}`);
        }
        out("people:");
        if (d.people.length === 0) out("  (none)");
        for (const p of d.people) out(`  ${p.role.padEnd(16)} ${p.name} <${p.email}>`);
        out("profiles:");
        if (d.profiles.length === 0) out("  (none)");
        for (const p of d.profiles) {
          const ends = p.startX === null ? "" : ` (${p.startX}, ${p.startY}) → (${p.endX}, ${p.endY}) ${p.crs}`;
          const model = p.latestApprovedModel ? `; approved model: run ${p.latestApprovedModel.runId} ${p.latestApprovedModel.stepLabel}` : "";
          out(`  ${p.name.padEnd(10)}${p.orientationDeg === null ? "" : ` ${p.orientationDeg}°`}${p.spreadDescription ? ` ${p.spreadDescription}` : ""}${ends}${model}`);
        }
        out(`datasets: ${d.datasets.length}; latest runs:`);
        for (const r of d.runs.slice(0, 10)) out(`  run ${String(r.id).padEnd(5)} ${r.status.padEnd(11)} ${r.pipelineName}${r.review ? ` (${r.review})` : ""}`);
      }),
    );

  detailOptions(surveys.command("create").description("create a survey").argument("<survey>", "short name: lower-case letters, digits and dashes"), true).action(
    action(async (slug: string, opts: DetailOptions) => {
      const input = parseOrExplain(newSurvey, { slug, ...pickDetails(opts) });
      const db = openCliDb();
      const actor = resolveActor(db, opts.as, "cli", EDIT);
      const created = createSurvey(db, input, actor);
      process.stdout.write(`created survey ${created.slug} (${created.name})\n`);
    }),
  );

  detailOptions(surveys.command("update").description("change a survey's details (the short name stays)").argument("<survey>", "short name"), false).action(
    action(async (slug: string, opts: DetailOptions) => {
      const db = openCliDb();
      const survey = getSurveyBySlug(db, parseOrExplain(surveySlug, slug));
      if (!survey) throw new AppError("not-found", `No survey "${slug}" (see tracewright surveys list)`, { field: "<survey>" });
      const changes = pickDetails(opts);
      if (Object.keys(changes).length === 0) throw new AppError("bad-input", "Nothing to change: give at least one of --name, --client, --site, --purpose, --start-date, --end-date, --notes");
      const merged = parseOrExplain(surveyDetails, { ...survey, ...changes });
      const actor = resolveActor(db, opts.as, "cli", EDIT);
      const fields = Object.fromEntries(Object.keys(changes).map((k) => [k, merged[k as keyof typeof merged]]));
      updateSurvey(db, slug, fields, actor);
      process.stdout.write(`updated survey ${slug}: ${Object.keys(changes).join(", ")}\n`);
    }),
  );

  surveys
    .command("add-profile")
    .description("add a profile (line) to a survey")
    .argument("<survey>", "short name")
    .argument("<line>", "line name, e.g. QM-1")
    .option("--orientation <degrees>", "bearing from start to end, degrees clockwise from grid north")
    .option("--spread <text>", "the spread in words, e.g. \"48 vertical 4.5 Hz geophones at 1 m\"")
    .option("--crs <code>", "coordinate reference of the ends, e.g. EPSG:27700")
    .option("--start <x,y>", "start of the line in that reference")
    .option("--end <x,y>", "end of the line in that reference")
    .option("--description <text>", "description")
    .option("--as <email>", "who makes the change (default: TRACEWRIGHT_USER, else the OS user)")
    .action(
      action(async (slug: string, line: string, opts: { orientation?: string; spread?: string; crs?: string; start?: string; end?: string; description?: string; as?: string }) => {
        const [startX, startY] = pair(opts.start);
        const [endX, endY] = pair(opts.end);
        const input = parseOrExplain(
          profileFields,
          {
            name: line,
            description: opts.description,
            orientationDeg: opts.orientation === undefined ? null : Number(opts.orientation),
            spreadDescription: opts.spread,
            crs: opts.crs,
            startX,
            startY,
            endX,
            endY,
          },
          line,
        );
        const db = openCliDb();
        const actor = resolveActor(db, opts.as, "cli", EDIT);
        const created = addProfile(db, slug, input, actor);
        process.stdout.write(`added profile ${created.name} to survey ${slug}\n`);
      }),
    );

  surveys
    .command("add-person")
    .description("put a user on a survey (or change what they do on it)")
    .argument("<survey>", "short name")
    .argument("<email>", "e-mail of a user (see tracewright users list)")
    .requiredOption("--role <role>", `one of: ${SURVEY_ROLES.join(", ")}`)
    .option("--as <email>", "who makes the change (default: TRACEWRIGHT_USER, else the OS user)")
    .action(
      action(async (slug: string, email: string, opts: { role: string; as?: string }) => {
        const input = parseOrExplain(surveyPerson, { email, role: opts.role });
        const db = openCliDb();
        const user = getUserByEmail(db, input.email);
        if (!user) throw new AppError("not-found", `<email>: no user with e-mail ${input.email} (see tracewright users list)`, { field: "<email>" });
        const actor = resolveActor(db, opts.as, "cli", EDIT);
        setSurveyPerson(db, slug, user.id, input.role, actor);
        process.stdout.write(`${user.name} is on survey ${slug} as ${input.role}\n`);
      }),
    );
}
