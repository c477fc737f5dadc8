// Query for the query editor of desktop spreadsheets (M language): posts a problem and loads
// the answer's CSV table (quantity, value, unit) into a sheet.
//
// Scenario (invented): the energy engineer of a brewery checks a jacketed vessel's cover plate
// after each design revision; refreshing the query re-runs the calculation.
let
    ServiceUrl = "http://127.0.0.1:8000/v1/plate?format=csv",
    Body = "{""width"": 0.8, ""height"": 0.25, ""conductivity"": 16, ""edges"": {""bottom"": {""type"": ""temperature"", ""value"": 95}, ""left"": {""type"": ""insulated""}, ""right"": {""type"": ""insulated""}, ""top"": {""type"": ""convection"", ""film_coefficient"": 9, ""ambient"": 22}}, ""points"": [[0.4, 0.25]], ""limits"": {""max_surface_temperature"": 60}}",
    Response = Web.Contents(ServiceUrl, [
        Headers = [#"Content-Type" = "application/json", Accept = "text/csv"],
        Content = Text.ToBinary(Body, TextEncoding.Utf8)
    ]),
    Table = Csv.Document(Response, [Delimiter = ",", Encoding = 65001, QuoteStyle = QuoteStyle.Csv]),
    Promoted = Table.PromoteHeaders(Table, [PromoteAllScalars = true]),
    Typed = Table.TransformColumnTypes(Promoted, {{"quantity", type text}, {"value", type text}, {"unit", type text}})
in
    Typed
