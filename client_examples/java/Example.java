// Fit the greenhouse demo scenario with Java 17's java.net.http (no libraries).
//
//   BASE_URL=http://127.0.0.1:8000 java client_examples/java/Example.java
//
// Reads the invented greenhouse trial (client_examples/data/greenhouse.json, made by
// scripts/demo_data.py), lets the service choose the degree, prints the chosen degree, the
// sequential table and a prediction at EC 3.5 dS/m made from the returned
// fitted-model document, which is sent back byte for byte as the service wrote it.
// JSON is read by the small parser at the end of this file. Set API_TOKEN if auth is on.
//
//   BASE_URL=http://127.0.0.1:8000 java client_examples/java/Example.java dose-response
//
// fits a four-parameter logistic to the standards of an invented ELISA plate
// (client_examples/data/plate.json), keeps the fitted-model document and reads unknown
// samples' readings (each the mean of 2 wells) back to concentrations with intervals,
// statuses and the curve's working range.

import java.net.URI;
import java.net.http.HttpClient;
import java.net.http.HttpRequest;
import java.net.http.HttpResponse;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;

public class Example {
    static final double NEW_EC = 3.5;
    static final String UNKNOWNS = "[0.2, 0.6, 1.4, 2.3, 3.2]"; // optical densities of samples
    static final int REPLICATES = 2; // each reading is the mean of 2 wells

    public static void main(String[] args) throws Exception {
        String baseUrl = System.getenv().getOrDefault("BASE_URL", "http://127.0.0.1:8000")
                .replaceAll("/+$", "");
        HttpClient http = HttpClient.newBuilder().connectTimeout(Duration.ofSeconds(10)).build();
        if (args.length == 1 && args[0].equals("dose-response")) {
            doseResponse(http, baseUrl);
            return;
        }
        Path data = dataFile("greenhouse.json");
        String body = Files.readString(data, StandardCharsets.UTF_8);

        String fitText = post(http, baseUrl + "/v1/fit", body);
        Map<String, Object> fit = Json.object(fitText);
        String document = Json.rawMember(fitText, "fitted_model");
        String predictBody = "{\"fitted_model\":" + document + ",\"x\":[" + NEW_EC + "]}";
        Map<String, Object> predicted = Json.object(post(http, baseUrl + "/v1/predict", predictBody));
        Map<?, ?> p = (Map<?, ?>) ((List<?>) predicted.get("predictions")).get(0);
        Map<?, ?> selection = (Map<?, ?>) fit.get("selection");
        double level = (Double) Json.object(body).get("level");

        System.out.printf("Greenhouse nutrient trial (invented demo data): %d benches%n",
                ((Double) fit.get("n")).intValue());
        System.out.printf("chosen degree: %d (%s)%n", ((Double) selection.get("chosen_degree")).intValue(),
                selection.get("method"));
        System.out.println("sequential table:");
        System.out.printf("%-10s%4s%16s%14s%12s%12s%n", "term", "df", "sum_of_squares",
                "mean_square", "F", "p_value");
        for (Object item : (List<?>) fit.get("anova")) {
            Map<?, ?> row = (Map<?, ?>) item;
            StringBuilder line = new StringBuilder(String.format(Locale.ROOT, "%-10s%4d%16s%14s",
                    row.get("term"), ((Double) row.get("df")).intValue(), g(row.get("sum_of_squares"), 6),
                    g(row.get("mean_square"), 6)));
            if (row.get("f") != null) {
                line.append(String.format(Locale.ROOT, "%12s%12s", g(row.get("f"), 6), g(row.get("p_value"), 4)));
            }
            System.out.println(line);
        }
        System.out.printf(Locale.ROOT, "prediction at x = %s: fit %s, %d%% new-observation band %s to %s%n",
                NEW_EC, g(p.get("fit"), 6), Math.round(100 * level), g(p.get("obs_lower"), 6),
                g(p.get("obs_upper"), 6));
    }

    /** The ELISA plate: fit the 4PL, keep the document, read the unknowns back through it. */
    static void doseResponse(HttpClient http, String baseUrl) throws Exception {
        String body = Files.readString(dataFile("plate.json"), StandardCharsets.UTF_8);
        String fitText = post(http, baseUrl + "/v1/fit", body);
        Map<String, Object> fit = Json.object(fitText);
        String document = Json.rawMember(fitText, "fitted_model"); // store it as written
        String invertBody = "{\"fitted_model\":" + document + ",\"y\":" + UNKNOWNS
                + ",\"replicates\":" + REPLICATES + "}";
        Map<String, Object> result = Json.object(post(http, baseUrl + "/v1/invert", invertBody));
        long level = Math.round(100 * (Double) Json.object(body).get("level"));
        Map<?, ?> ec50 = null;
        for (Object item : (List<?>) fit.get("coefficients")) {
            if ("ec50".equals(((Map<?, ?>) item).get("term"))) ec50 = (Map<?, ?>) item;
        }
        Map<?, ?> span = (Map<?, ?>) result.get("working_range");
        System.out.printf("ELISA plate (invented demo data): %d standards, %s%n",
                ((Double) fit.get("n")).intValue(), ((Map<?, ?>) fit.get("model")).get("family"));
        System.out.printf("ec50 %s, %d%% interval %s to %s%n", g(ec50.get("estimate"), 6), level,
                g(ec50.get("lower"), 6), g(ec50.get("upper"), 6));
        System.out.printf("working range (CV <= %s%%, %d replicates): %s to %s%n",
                g(100 * (Double) span.get("cv_limit"), 6), ((Double) span.get("replicates")).intValue(),
                g(span.get("lower"), 6), g(span.get("upper"), 6));
        for (Object item : (List<?>) result.get("estimates")) {
            Map<?, ?> e = (Map<?, ?>) item;
            if (e.get("x") == null) {
                System.out.printf("reading %s: no concentration (%s)%n", g(e.get("y"), 6), e.get("status"));
                continue;
            }
            String lower = e.get("lower") == null ? "unbounded" : g(e.get("lower"), 6);
            String upper = e.get("upper") == null ? "unbounded" : g(e.get("upper"), 6);
            System.out.printf("reading %s: x %s, %d%% interval %s to %s (%s)%n", g(e.get("y"), 6),
                    g(e.get("x"), 6), level, lower, upper, e.get("status"));
        }
        System.out.println("back-calculated values support, never replace, a validated assay procedure");
    }

    static Path dataFile(String name) {
        for (String candidate : new String[] {"client_examples/data/" + name, "../data/" + name,
                "data/" + name}) {
            Path path = Path.of(candidate);
            if (Files.exists(path)) return path;
        }
        throw new IllegalStateException("run from the repository root: " + name + " not found");
    }

    static String post(HttpClient http, String url, String json) throws Exception {
        HttpRequest.Builder request = HttpRequest.newBuilder(URI.create(url))
                .timeout(Duration.ofSeconds(30))
                .header("Content-Type", "application/json")
                .header("Accept", "application/json")
                .POST(HttpRequest.BodyPublishers.ofString(json, StandardCharsets.UTF_8));
        String token = System.getenv("API_TOKEN");
        if (token != null && !token.isEmpty()) request.header("Authorization", "Bearer " + token);
        HttpResponse<String> response = http.send(request.build(),
                HttpResponse.BodyHandlers.ofString(StandardCharsets.UTF_8));
        if (response.statusCode() >= 400) {
            // Every error is RFC 9457 problem details: detail says what to do, errors names fields.
            Map<String, Object> problem = Json.object(response.body());
            System.err.printf("error %d: %s%n", response.statusCode(), problem.get("detail"));
            Object errors = problem.get("errors");
            if (errors instanceof Map<?, ?> map) {
                map.forEach((field, messages) -> System.err.printf("  %s: %s%n", field, messages));
            }
            System.exit(1);
        }
        return response.body();
    }

    /** Like %g with trailing zeros removed: 6 significant digits by default. */
    static String g(Object value, int digits) {
        double v = (Double) value;
        if (v == 0.0) return "0";
        java.math.BigDecimal rounded = new java.math.BigDecimal(v)
                .round(new java.math.MathContext(digits)).stripTrailingZeros();
        int exponent = rounded.precision() - rounded.scale() - 1; // as %g decides: plain or not
        String text = exponent >= -4 && exponent < digits ? rounded.toPlainString() : rounded.toString();
        return text.replace("E", "e");
    }

    /** A small strict JSON reader: objects -> LinkedHashMap, arrays -> ArrayList, numbers -> Double. */
    static final class Json {
        private final String text;
        private int pos;
        private final Map<String, int[]> spans = new LinkedHashMap<>();

        private Json(String text) {
            this.text = text;
        }

        @SuppressWarnings("unchecked")
        static Map<String, Object> object(String text) {
            Json reader = new Json(text);
            Object value = reader.value(true);
            reader.skipSpace();
            if (reader.pos != text.length()) throw reader.error("trailing characters");
            return (Map<String, Object>) value;
        }

        /** The exact source text of one member of the top-level object. */
        static String rawMember(String text, String name) {
            Json reader = new Json(text);
            reader.value(true);
            int[] span = reader.spans.get(name);
            if (span == null) throw new IllegalArgumentException("no member " + name);
            return text.substring(span[0], span[1]);
        }

        private Object value(boolean top) {
            skipSpace();
            if (pos >= text.length()) throw error("unexpected end");
            char c = text.charAt(pos);
            if (c == '{') return members(top);
            if (c == '[') return elements();
            if (c == '"') return string();
            if (text.startsWith("true", pos)) { pos += 4; return Boolean.TRUE; }
            if (text.startsWith("false", pos)) { pos += 5; return Boolean.FALSE; }
            if (text.startsWith("null", pos)) { pos += 4; return null; }
            return number();
        }

        private Map<String, Object> members(boolean top) {
            Map<String, Object> out = new LinkedHashMap<>();
            pos++;
            skipSpace();
            if (peek() == '}') { pos++; return out; }
            while (true) {
                skipSpace();
                String key = string();
                skipSpace();
                expect(':');
                skipSpace();
                int start = pos;
                out.put(key, value(false));
                if (top) spans.put(key, new int[] {start, pos});
                skipSpace();
                if (peek() == ',') { pos++; continue; }
                expect('}');
                return out;
            }
        }

        private List<Object> elements() {
            List<Object> out = new ArrayList<>();
            pos++;
            skipSpace();
            if (peek() == ']') { pos++; return out; }
            while (true) {
                out.add(value(false));
                skipSpace();
                if (peek() == ',') { pos++; continue; }
                expect(']');
                return out;
            }
        }

        private String string() {
            expect('"');
            StringBuilder out = new StringBuilder();
            while (true) {
                char c = text.charAt(pos++);
                if (c == '"') return out.toString();
                if (c != '\\') { out.append(c); continue; }
                char e = text.charAt(pos++);
                switch (e) {
                    case 'n' -> out.append('\n');
                    case 't' -> out.append('\t');
                    case 'r' -> out.append('\r');
                    case 'b' -> out.append('\b');
                    case 'f' -> out.append('\f');
                    case 'u' -> { out.append((char) Integer.parseInt(text.substring(pos, pos + 4), 16)); pos += 4; }
                    default -> out.append(e);  // \" \\ \/
                }
            }
        }

        private Double number() {
            int start = pos;
            while (pos < text.length() && "+-0123456789.eE".indexOf(text.charAt(pos)) >= 0) pos++;
            if (start == pos) throw error("unexpected character");
            return Double.valueOf(text.substring(start, pos));
        }

        private void skipSpace() {
            while (pos < text.length() && Character.isWhitespace(text.charAt(pos))) pos++;
        }

        private char peek() {
            return pos < text.length() ? text.charAt(pos) : '\0';
        }

        private void expect(char c) {
            if (peek() != c) throw error("expected '" + c + "'");
            pos++;
        }

        private IllegalArgumentException error(String what) {
            return new IllegalArgumentException("JSON: " + what + " at position " + pos);
        }
    }
}
